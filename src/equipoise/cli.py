"""The ``equipoise`` command line: parses, calls the public functions, prints.

Every user mistake ends in one line on standard error and exit status 2.
"""

from __future__ import annotations

import argparse
import json
import os
import re
import sys

from . import _report
from ._errors import InputError

EXIT_INPUT = 2


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


def _use_compile_cache() -> None:
    """Keep compiled solvers between runs (set EQUIPOISE_CACHE=off to disable)."""
    where = os.environ.get("EQUIPOISE_CACHE", os.path.join(os.path.expanduser("~"), ".cache", "equipoise", "jax"))
    if where.lower() in ("", "0", "off", "none"):
        return
    import jax

    jax.config.update("jax_compilation_cache_dir", where)
    jax.config.update("jax_persistent_cache_min_compile_time_secs", 0.2)


def _run_solve(game, model: str, args) -> int:
    from ._solve import solve

    params = _parse_sets(args.set or [])
    solution = solve(game, params, starts=args.starts, seed=args.seed, all_equilibria=args.all)
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


def _solve_options(p: argparse.ArgumentParser, sets: bool = True) -> None:
    if sets:
        p.add_argument("--set", action="append", metavar="NAME=VALUE",
                       help="override a parameter; VALUE is a number or a JSON list (repeatable)")
    p.add_argument("--starts", type=int, default=64, help="number of starting points (default 64)")
    p.add_argument("--seed", type=int, default=0, help="seed of the starting-point sample (default 0)")
    p.add_argument("--all", action="store_true",
                   help="search for every equilibrium: deflation rounds after the multistart")
    p.add_argument("--json", action="store_true", help="print one JSON object instead of tables")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="equipoise", description="Find and verify Nash equilibria of continuous-action games.")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)
    p = sub.add_parser("solve", help="find, verify and report the equilibria of a model file")
    p.add_argument("model", help="a Python file that defines `game`")
    _solve_options(p)
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
    p = sub.add_parser("demo", help="solve the built-in demonstration scenario")
    _solve_options(p)
    p.set_defaults(func=_cmd_demo)
    return parser


def main(argv: list[str] | None = None) -> int:
    args = build_parser().parse_args(argv)
    if getattr(args, "starts", 1) < 1:
        print(f"equipoise {args.command}: error: --starts: expected a positive whole number, got {args.starts}",
              file=sys.stderr)
        return EXIT_INPUT
    if getattr(args, "seed", 0) < 0:
        print(f"equipoise {args.command}: error: --seed: expected a non-negative whole number, got {args.seed}",
              file=sys.stderr)
        return EXIT_INPUT
    _use_compile_cache()
    try:
        return args.func(args)
    except InputError as exc:
        print(f"equipoise {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_INPUT
    except BrokenPipeError:  # output piped into a reader that stopped early
        sys.stderr.close()
        return 0


if __name__ == "__main__":
    sys.exit(main())
