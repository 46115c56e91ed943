"""Games shared by several test files, built once per test session.

Every distinct Game object compiles its own solver, and compiling dominates
the suite's run time. Tests therefore take their games from here (one object
per shape) and pass instance values through ``solve(game, params)``.
All numbers are invented.
"""

from __future__ import annotations

import functools

import equipoise


@functools.cache
def cournot3():
    """Three-firm linear Cournot; defaults are the Tirole (1988) ch. 5 instance."""
    return equipoise.cournot(a=100.0, b=2.0, costs=[10.0, 20.0, 30.0])


@functools.cache
def logit_single():
    """Three single-product firms with logit demand."""
    return equipoise.logit_bertrand(delta=[1.0, 0.5, 1.5], alpha=0.7, costs=[1.0, 1.2, 0.8])


@functools.cache
def logit_multi():
    """Five products, three firms: two own two products each, one owns one."""
    return equipoise.logit_bertrand(
        delta=[1.2, 0.4, 0.9, 1.6, 0.7],
        alpha=0.9,
        costs=[1.0, 0.8, 1.1, 1.4, 0.6],
        owner=["tern", "tern", "heron", "heron", "plover"],
        market_size=50.0,
    )


@functools.cache
def logit_monopoly():
    """One product sold by one firm (the outside good is the only rival)."""
    return equipoise.logit_bertrand(delta=[1.0], alpha=1.0, costs=[1.0])


@functools.cache
def bertrand(n: int):
    """Symmetric n-firm linear Bertrand with a=10, b=2, d=0.5, c=1."""
    return equipoise.linear_bertrand(a=10.0, b=2.0, d=0.5, costs=[1.0] * n)
