"""Bulk solves of a small logit pricing game: equipoise against a scipy.optimize.root loop.

Both sides solve the same first-order conditions from the same starting prices; the figure
is the ratio of wall times in this run (compilation included for equipoise).

    python benchmarks/bench_solve.py [--points N]
"""

import argparse
import time

import jax
import jax.numpy as jnp
import numpy as np
from scipy.optimize import root

import equipoise


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--points", type=int, default=2000)
    args = ap.parse_args()
    rng = np.random.default_rng(0)
    owner = ["f1", "f1", "f1", "f2", "f2", "f2", "f3", "f3", "f3"]
    game = equipoise.logit_bertrand(delta=np.linspace(0.5, 2.0, 9), alpha=1.0, costs=np.ones(9), owner=owner)
    costs = 1.0 + rng.uniform(0.0, 1.0, size=(args.points, 9))
    x0 = costs + 1.0

    t = time.perf_counter()
    run = jax.jit(jax.vmap(lambda x, c: equipoise.newton_solve(game, x, game.theta({"c": c}))))
    ours = jax.tree.map(np.asarray, run(jnp.asarray(x0), jnp.asarray(costs)))
    t_ours = time.perf_counter() - t

    grad = jax.jit(lambda x, c: game.pseudo_gradient(x, game.theta({"c": c})))
    grad(jnp.asarray(x0[0]), jnp.asarray(costs[0]))  # compile the reference's function outside its timing
    t = time.perf_counter()
    ref = np.array([root(lambda x: np.asarray(grad(x, c)), x0=s, method="hybr").x for s, c in zip(x0, costs)])
    t_ref = time.perf_counter() - t

    ok = ours.status == equipoise.Status.success.code
    agree = np.max(np.abs(ours.x[ok] - ref[ok])) if ok.any() else np.nan
    print(f"points {args.points}: equipoise {args.points / t_ours:.0f}/s (success {ok.mean():.1%}), "
          f"scipy hybr loop {args.points / t_ref:.0f}/s, ratio {t_ref / t_ours:.1f}x, max |diff| {agree:.1e}")


if __name__ == "__main__":
    main()
