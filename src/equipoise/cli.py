"""The ``equipoise`` command line: parses, calls the public functions, prints.

Every user mistake ends in one line on standard error and exit status 2.
"""

from __future__ import annotations

import argparse
import json
import re
import sys

from . import _report
from ._compile_cache import use_compile_cache
from ._errors import InputError

EXIT_INPUT = 2
EXIT_INTERRUPTED = 130


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, no usage block
        self.exit(EXIT_INPUT, f"{self.prog}: error: {message}\n")


def _parse_sets(items: list[str]) -> dict:
    out = {}
    for item in items:
        name, sep, text = item.partition("=")
        name = name.strip()
        if not sep or not name:
            raise InputError(f"--set {item!r}: expected NAME=VALUE, e.g. --set c=[1.0,2.0]")
        try:
            value = json.loads(text)
        except json.JSONDecodeError:
            raise InputError(f"--set {name}: value {text!r} is not a number or a JSON list") from None
        if not _numeric(value):
            raise InputError(f"--set {name}: value {text!r} is not a number or a (nested) list of numbers")
        out[name] = value
    return out


def _numeric(value) -> bool:
    if isinstance(value, bool) or value is None or isinstance(value, str):
        return False
    if isinstance(value, list):
        return all(_numeric(v) for v in value)
    return isinstance(value, (int, float))


def _run_solve(game, model: str, args) -> int:
    from ._solve import solve

    params = _parse_sets(args.set or [])
    solution = solve(game, params, starts=args.starts, seed=args.seed, all_equilibria=args.all, method=args.method)
    if args.json:
        json.dump(_report.solution_dict(solution, game, model), sys.stdout, indent=2)
        sys.stdout.write("\n")
    else:
        print(_report.solution_table(solution, game, model))
    return 0


def _cmd_solve(args) -> int:
    from ._loader import load_game

    return _run_solve(load_game(args.model), args.model, args)


def _cmd_demo(args) -> int:
    from ._demo import demo_game

    game = demo_game()
    return _run_solve(game, game.name, args)


def _cmd_check(args) -> int:
    from .stability import classify
    from .stability._input import load_jacobian

    J, blocks = load_jacobian(args.file)
    report = classify(J, blocks)
    if args.json:
        json.dump(report.to_dict(), sys.stdout, indent=2)
        sys.stdout.write("\n")
    else:
        print(f"Jacobian: {args.file}   ({J.shape[0]} coordinates, blocks {list(blocks)})")
        print("\n".join(_report.stability_lines(report)))
        print()
        print(_report.CAUTION)
    return 0


_PARAM = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*(?:\[\s*(\d+)\s*\])?\s*$")


def _cmd_trace(args) -> int:
    from ._continuation import trace, with_entry
    from ._loader import load_game
    from ._solve import solve

    m = _PARAM.match(args.param)
    if not m:
        raise InputError(f"--param {args.param!r}: expected NAME or NAME[INDEX], e.g. c[0]")
    name, index = m.group(1), None if m.group(2) is None else int(m.group(2))
    game = load_game(args.model)
    params = _parse_sets(args.set or [])
    at_start = {**params, name: with_entry(game, name, index, params, args.start).tolist()}
    solution = solve(game, at_start, starts=args.starts, seed=args.seed, stability=False,
                     all_equilibria=args.all)
    chosen = solution.equilibria
    if args.equilibrium is not None:
        if not 1 <= args.equilibrium <= len(chosen):
            raise InputError(f"--equilibrium {args.equilibrium}: {len(chosen)} equilibria were found at "
                             f"{args.param} = {args.start:g}; expected a number from 1 to {len(chosen)}")
        chosen = [chosen[args.equilibrium - 1]]
    if not chosen:
        raise InputError(f"no equilibrium found at {args.param} = {args.start:g} to trace from "
                         f"(try more --starts)")
    branches = [trace(game, name, args.start, args.end, e.x, params, index=index) for e in chosen]
    if args.json:
        json.dump(_report.branches_dict(branches, game, args.model, args.param, args.start, args.end),
                  sys.stdout, indent=2)
        sys.stdout.write("\n")
    else:
        print(_report.branches_table(branches, game, args.model, args.param, args.start, args.end))
    return 0


def _cmd_statics(args) -> int:
    from ._loader import load_game
    from ._statics import check_wrt, statics

    game = load_game(args.model)
    check_wrt(game, args.wrt)
    params = _parse_sets(args.set or [])
    results = statics(game, params, args.wrt, starts=args.starts, seed=args.seed, all_equilibria=args.all)
    if args.json:
        json.dump(_report.statics_dict(results, game, args.model, args.wrt, game.theta(params)),
                  sys.stdout, indent=2)
        sys.stdout.write("\n")
    else:
        print(_report.statics_table(results, game, args.model, args.wrt))
    return 0


def _cmd_counterfactual(args) -> int:
    from ._counterfactual import counterfactual
    from ._loader import load_game

    game = load_game(args.model)
    eta = None
    if args.income_elasticity is not None:
        try:
            eta = json.loads(args.income_elasticity)
        except json.JSONDecodeError:
            eta = None
        ok = (_numeric(eta) and not isinstance(eta, list)) or (isinstance(eta, list) and len(eta) == 2
                                                               and _numeric(eta))
        if not ok:
            raise InputError(f"--income-elasticity {args.income_elasticity!r}: expected a number or [low, high]")
    result = counterfactual(game, _parse_sets(args.set or []), _parse_sets(args.to or []),
                            equilibrium=args.equilibrium - 1, income=args.income, elasticity=eta,
                            starts=args.starts, seed=args.seed)
    if args.json:
        json.dump(_report.counterfactual_dict(result, game, args.model), sys.stdout, indent=2)
        sys.stdout.write("\n")
    else:
        print(_report.counterfactual_table(result, game, args.model))
    return 0


def _cmd_sweep(args) -> int:
    from .sweeps import load_spec, sweep
    from .sweeps._spec import SweepSpec, spec_from_flags

    flags = {"--axis": args.axis, "--set": args.set, "--sample": args.sample, "--sample-seed": args.sample_seed,
             "--starts": args.starts, "--seed": args.seed, "--all": args.all or None, "--labels": args.labels,
             "--deviation-starts": args.deviation_starts, "--batch": args.batch}
    if args.target.endswith(".toml"):
        given = [k for k, v in flags.items() if v is not None]
        if given:
            raise InputError(f"{args.target}: {given[0]} cannot be combined with a sweep file; "
                             "write it in the file instead")
        spec, store = load_spec(args.target)
        store = args.store or store or args.target[: -len(".toml")] + ".sqlite"
    else:
        if not args.axis:
            raise InputError(f"{args.target}: expected a sweep file (.toml) or a model file with --axis "
                             "NAME=START:STOP:NUM (repeatable)")
        if not args.store:
            raise InputError("--store: expected the path of the results store, e.g. --store sweep.sqlite")
        defaults = {f.name: f.default for f in SweepSpec.__dataclass_fields__.values()}
        settings = {key: (defaults[key] if getattr(args, key) is None else getattr(args, key))
                    for key in ("sample_seed", "starts", "seed", "labels", "deviation_starts", "batch")}
        spec = spec_from_flags(args.target, args.axis, _parse_sets(args.set or []), args.sample,
                               all_equilibria=bool(args.all), **settings)
        store = args.store
    result = sweep(spec, store, engine=args.engine, workers=args.workers, scheduler=args.scheduler, new=args.new,
                   progress=not args.quiet)
    if args.json:
        json.dump(_report.sweep_dict(result), sys.stdout, indent=2)
        sys.stdout.write("\n")
    else:
        print(_report.sweep_summary(result))
    return EXIT_INTERRUPTED if result.interrupted else 0


def _cmd_export(args) -> int:
    from .sweeps import Store

    store = Store.read(args.store)
    try:
        rows = store.export_csv(args.csv)
    finally:
        store.close()
    print(f"wrote {rows} rows to {args.csv}")
    return 0


def _parse_size(text: str) -> tuple[int, int]:
    m = re.match(r"^\s*(\d+)\s*[xX]\s*(\d+)\s*$", text or "")
    if not m:
        raise InputError(f"--size {text!r}: expected WIDTHxHEIGHT in pixels, e.g. 900x650")
    return int(m.group(1)), int(m.group(2))


def _cmd_plot(args) -> int:
    from .sweeps import plot_store

    at = {}
    for item in args.at or []:
        name, sep, text = item.partition("=")
        try:
            at[name.strip()] = float(text)
        except ValueError:
            raise InputError(f"--at {item!r}: expected NAME=VALUE with a number, e.g. --at a=100") from None
        if not sep or not name.strip():
            raise InputError(f"--at {item!r}: expected NAME=VALUE, e.g. --at a=100")
    out = plot_store(args.store, args.out, x=args.x, y=args.y, color=args.color, actions=args.action or None,
                     at=at or None, size=_parse_size(args.size))
    print(f"wrote {out}")
    return 0


def _cmd_simulate(args) -> int:
    from ._loader import load_game
    from .dynamics import _summary, basins, plot_basins, plot_simulation, simulate

    game = load_game(args.model)
    params = _parse_sets(args.set or [])
    rule = _parse_rule(args.rule or ["flow"], game)
    speeds = _json_numbers("--speeds", args.speeds) if args.speeds else None
    common = dict(rule=rule, speeds=speeds, steps=args.steps, dt=args.dt, lr=args.lr, seed=args.seed)
    size = _parse_size(args.size)
    if args.plot:  # before the run, and named by this command's flag
        from .sweeps._plot import _check_out, _check_size

        try:
            _check_out(args.plot)
            _check_size(size)
        except InputError as exc:
            raise InputError(str(exc).replace("--out", "--plot", 1)) from None
    if args.basins:
        result = basins(game, params, starts=args.basins, **common)
        out = _summary.basins_dict(result, game, args.model) if args.json else _summary.basins_text(result, game,
                                                                                                      args.model)
        draw = plot_basins
    else:
        start = _json_numbers("--start", args.start) if args.start else None
        result = simulate(game, params, start=start, equilibrium=args.equilibrium - 1, perturb=args.perturb,
                          **common)
        out = _summary.simulation_dict(result, game, args.model) if args.json else \
            _summary.simulation_text(result, game, args.model)
        draw = plot_simulation
    if args.plot:
        draw(result, args.plot, game=game, size=size)
    if args.json:
        json.dump(out, sys.stdout, indent=2)
        sys.stdout.write("\n")
    else:
        print(out + (f"\nwrote {args.plot}" if args.plot else ""))
    return 0


def _parse_rule(items: list[str], game):
    if len(items) == 1 and "=" not in items[0]:
        return items[0]
    out = {}
    for item in items:
        player, sep, rule = item.partition("=")
        if not sep or player.strip() not in game.players:
            raise InputError(f"--rule {item!r}: expected RULE, or PLAYER=RULE for each player "
                             f"({', '.join(game.players)})")
        out[player.strip()] = rule.strip()
    return out


def _json_numbers(flag: str, text: str) -> list:
    try:
        value = json.loads(text)
    except json.JSONDecodeError:
        value = None
    if not (isinstance(value, list) and value and _numeric(value)):
        raise InputError(f"{flag} {text!r}: expected a JSON list of numbers, e.g. [1, 0.5]")
    return value


def _solve_options(p: argparse.ArgumentParser, sets: bool = True) -> None:
    if sets:
        p.add_argument("--set", action="append", metavar="NAME=VALUE",
                       help="override a parameter; VALUE is a number or a JSON list (repeatable)")
    p.add_argument("--starts", type=int, default=64, help="number of starting points (default 64)")
    p.add_argument("--seed", type=int, default=0, help="seed of the starting-point sample (default 0)")
    p.add_argument("--all", action="store_true",
                   help="search for every equilibrium: deflation rounds after the multistart")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of tables")


#: ``_solve.METHODS``, spelled out so that building the parser imports no solver code.
METHODS = ("auto", "newton", "krylov", "fixed_point")


def _method_option(p: argparse.ArgumentParser) -> None:
    p.add_argument("--method", choices=METHODS, default="auto",
                   help="auto (default: the model's fixed-point map if it has one, else krylov from 100 "
                        "actions, else newton), newton (dense Jacobian), krylov (matrix-free, for large "
                        "games) or fixed_point (the logit families' markup equation)")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="equipoise", description="Find and verify Nash equilibria of continuous-action games.")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)
    p = sub.add_parser("solve", help="find, verify and report the equilibria of a model file")
    p.add_argument("model", help="a Python file that defines `game`")
    _solve_options(p)
    _method_option(p)
    p.set_defaults(func=_cmd_solve)
    p = sub.add_parser("check", help="stability labels of a Jacobian given in a JSON file")
    p.add_argument("file", help='JSON: {"jacobian": [[..]], "blocks": [m_1, ...]} (blocks optional)')
    p.add_argument("--json", action="store_true", help="print the stability object as JSON")
    p.set_defaults(func=_cmd_check)
    p = sub.add_parser("trace", help="follow equilibria as one parameter moves, and locate events")
    p.add_argument("model", help="a Python file that defines `game`")
    p.add_argument("--param", required=True, metavar="NAME[INDEX]",
                   help="the parameter that moves, or one entry of a vector parameter")
    p.add_argument("--from", dest="start", type=float, required=True, metavar="A", help="value at the start")
    p.add_argument("--to", dest="end", type=float, required=True, metavar="B", help="value at the end")
    p.add_argument("--equilibrium", type=int, metavar="K",
                   help="trace only the K-th equilibrium found at the start (1-based; default all)")
    _solve_options(p)
    p.set_defaults(func=_cmd_trace)
    p = sub.add_parser("statics", help="comparative statics (pass-through) of every equilibrium")
    p.add_argument("model", help="a Python file that defines `game`")
    p.add_argument("--wrt", required=True, metavar="NAME", help="the parameter to differentiate with respect to")
    _solve_options(p)
    p.set_defaults(func=_cmd_statics)
    p = sub.add_parser("counterfactual", help="what a baseline equilibrium becomes under new parameters")
    p.add_argument("model", help="a Python file that defines `game`")
    p.add_argument("--to", action="append", metavar="NAME=VALUE", required=True,
                   help="a counterfactual parameter value (repeatable), e.g. a merger's ownership matrix")
    p.add_argument("--equilibrium", type=int, default=1, metavar="K",
                   help="which baseline equilibrium (1-based, default 1)")
    p.add_argument("--income", type=float, metavar="M", help="consumers' income, for Willig's bound")
    p.add_argument("--income-elasticity", metavar="ETA", help="a number or [low, high], for Willig's bound")
    _solve_options(p)
    p.set_defaults(func=_cmd_counterfactual)
    p = sub.add_parser("sweep", help="solve, verify and label every point of a parameter grid into a store")
    p.add_argument("target", metavar="SPEC.toml|MODEL.py",
                   help="a sweep file (TOML), or a model file with --axis flags")
    p.add_argument("--store", metavar="FILE", help="the SQLite results store (created, or resumed if it exists)")
    p.add_argument("--engine", choices=("inprocess", "processes", "dask"), default="inprocess",
                   help="where batches run (default inprocess)")
    p.add_argument("--scheduler", metavar="ADDRESS", help="a running Dask scheduler (with --engine dask); "
                   "without it a local cluster is started")
    p.add_argument("--workers", type=int, metavar="N", help="worker processes (default: number of cores)")
    p.add_argument("--new", action="store_true",
                   help="if the store holds another sweep, keep it aside under a new name and start afresh")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.add_argument("--json", action="store_true", help="print the summary as one JSON object")
    g = p.add_argument_group("sweep from flags (with a model file)")
    g.add_argument("--axis", action="append", metavar="NAME=START:STOP:NUM",
                   help="an axis: NAME or NAME[INDEX] = START:STOP:NUM[:log], or = [v1,v2,...]; with --sample, "
                        "= LOW:HIGH[:log] (repeatable)")
    g.add_argument("--set", action="append", metavar="NAME=VALUE", help="a fixed parameter value (repeatable)")
    g.add_argument("--sample", type=int, metavar="N", help="N Sobol points of the axes' box instead of the grid")
    g.add_argument("--sample-seed", type=int, metavar="S", help="seed of that sample (default 0)")
    g.add_argument("--starts", type=int, metavar="N", help="Sobol starts per point (default 8)")
    g.add_argument("--seed", type=int, metavar="S", help="seed of the starts and deviation search (default 0)")
    g.add_argument("--all", action="store_true", help="deflation rounds at every point (all equilibria)")
    g.add_argument("--labels", choices=("full", "equal", "none"), help="stability labels (default full)")
    g.add_argument("--deviation-starts", type=int, metavar="N", help="deviation-check starts per player (default 8)")
    g.add_argument("--batch", type=int, metavar="N", help="points per batch (default 64)")
    p.set_defaults(func=_cmd_sweep)
    p = sub.add_parser("export", help="write a results store as CSV")
    p.add_argument("store", help="a results store written by equipoise sweep")
    p.add_argument("--csv", required=True, metavar="FILE", help="the CSV file to write")
    p.set_defaults(func=_cmd_export)
    p = sub.add_parser("plot", help="draw a results store: a map over two axes, or actions over one")
    p.add_argument("store", help="a results store written by equipoise sweep")
    p.add_argument("--x", required=True, metavar="AXIS", help="the horizontal axis (an axis name of the sweep)")
    p.add_argument("--y", metavar="AXIS", help="the vertical axis for a map; without it, actions against --x")
    p.add_argument("--color", default="coordinate_speeds",
                   choices=("coordinate_speeds", "player_speeds", "equal_speeds", "nash", "count"),
                   help="what the colours show (default coordinate_speeds)")
    p.add_argument("--action", action="append", metavar="NAME", help="an action to draw against --x (repeatable)")
    p.add_argument("--at", action="append", metavar="NAME=VALUE", help="fix another axis of the sweep (repeatable)")
    p.add_argument("--size", default="900x650", metavar="WxH", help="picture size in pixels (default 900x650)")
    p.add_argument("--out", required=True, metavar="FILE.png", help="the PNG file to write")
    p.set_defaults(func=_cmd_plot)
    p = sub.add_parser("simulate", help="simulate learning or adjustment dynamics and say how they end")
    p.add_argument("model", help="a Python file that defines `game`")
    p.add_argument("--set", action="append", metavar="NAME=VALUE", help="override a parameter (repeatable)")
    p.add_argument("--rule", action="append", metavar="RULE|PLAYER=RULE",
                   help="flow (default), gradient, momentum, adam, optimistic, best_response, alternating; "
                        "or PLAYER=RULE per player to mix optimisers (repeatable)")
    p.add_argument("--speeds", metavar="[k1,k2,...]", help="one speed per player or per action (JSON list)")
    p.add_argument("--steps", type=int, default=2000, help="steps to simulate (default 2000)")
    p.add_argument("--perturb", type=float, default=1e-6,
                   help="relative perturbation of the equilibrium the run starts from (default 1e-6)")
    p.add_argument("--equilibrium", type=int, default=1, metavar="K",
                   help="start next to the K-th equilibrium found (1-based, default 1)")
    p.add_argument("--start", metavar="[x1,x2,...]", help="start from these stacked actions instead")
    p.add_argument("--dt", type=float, help="time step of the flow (default from the Jacobian's size)")
    p.add_argument("--lr", type=float, help="learning rate of the optimisers (default from the Jacobian's size)")
    p.add_argument("--seed", type=int, default=0, help="seed of the perturbation and of the solve (default 0)")
    p.add_argument("--basins", type=int, metavar="N", help="run N Sobol starts at once and report the share "
                   "reaching each equilibrium")
    p.add_argument("--plot", metavar="FILE.png", help="draw the run (actions over time; phase plane for two "
                   "actions) or the basins")
    p.add_argument("--size", default="900x650", metavar="WxH", help="picture size in pixels (default 900x650)")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(func=_cmd_simulate)
    p = sub.add_parser("demo", help="solve the built-in demonstration scenario")
    _solve_options(p)
    _method_option(p)
    p.set_defaults(func=_cmd_demo)
    return parser


def main(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    for flag in ("starts", "workers", "sample", "deviation_starts", "batch", "steps", "basins"):
        value = getattr(args, flag, None)
        if value is not None and value < 1:
            print(f"equipoise {args.command}: error: --{flag.replace('_', '-')}: expected a positive whole number, "
                  f"got {value}", file=sys.stderr)
            return EXIT_INPUT
    for flag in ("seed", "sample_seed"):
        value = getattr(args, flag, None)
        if value is not None and value < 0:
            print(f"equipoise {args.command}: error: --{flag.replace('_', '-')}: expected a non-negative whole "
                  f"number, got {value}", file=sys.stderr)
            return EXIT_INPUT
    use_compile_cache()
    try:
        return args.func(args)
    except InputError as exc:
        print(f"equipoise {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except KeyboardInterrupt:
        print(f"equipoise {args.command}: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except BrokenPipeError:  # output piped into a reader that stopped early
        sys.stderr.close()
        return 0


if __name__ == "__main__":
    sys.exit(main())
