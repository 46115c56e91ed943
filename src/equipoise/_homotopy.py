r"""Artificial homotopies: reach an equilibrium of a hard game from an easy one.

Both build a game with one extra parameter ``homotopy_t`` in [0, 1] whose
``t = 1`` member is the original game, and follow its equilibrium from
``t = 0`` by :func:`equipoise.trace` (through turning points and bound changes).

* ``interaction``: player :math:`i` faces
  :math:`u_i(x_i, x^0_{-i} + t (x_{-i} - x^0_{-i}))`. At ``t = 0`` every
  player best-responds to fixed rivals at :math:`x^0`: the problem decouples.
* ``newton``: :math:`H(x, t) = F(x) - (1 - t) F(x^0)`, the pseudo-gradient of
  :math:`u_i(x) - (1 - t) F_i(x^0) \cdot x_i`; ``x^0`` itself solves ``t = 0``
  (when it is inside the bounds).

Reference: Allgower & Georg (1990), *Numerical Continuation Methods*, ch. 1
(the global homotopy and Newton homotopy).
"""

from __future__ import annotations

import jax.numpy as jnp
import numpy as np

from ._continuation import Branch, trace
from ._errors import InputError
from ._game import Game
from ._newton import newton_solve
from ._status import Status

KINDS = ("interaction", "newton")
T = "homotopy_t"


def _embedded(game, theta, x0: np.ndarray, kind: str) -> Game:
    players = game.players
    names = list(theta)
    x0j = jnp.asarray(x0)
    if kind == "interaction":
        def payoffs(x, th):
            t = th[T]
            base = {k: th[k] for k in names}
            own = game.stack(x)
            rivals = x0j + t * (own - x0j)
            out = {}
            for p, o, m in zip(players, game.offsets, game.sizes):
                mixed = rivals.at[o:o + m].set(own[o:o + m])
                out[p] = game.payoffs(game.split(mixed), base)[p]
            return out
    else:
        F0 = game.pseudo_gradient(x0j, theta)

        def payoffs(x, th):
            t = th[T]
            base = {k: th[k] for k in names}
            u = game.payoffs(x, base)
            own = game.stack(x)
            return {p: u[p] - (1.0 - t) * jnp.dot(F0[o:o + m], own[o:o + m])
                    for p, o, m in zip(players, game.offsets, game.sizes)}

    lo, hi = (np.asarray(v) for v in game.region(theta))
    split = lambda v: {p: np.asarray(a).tolist() for p, a in game.split(np.asarray(v)).items()}  # noqa: E731
    box = {p: (a, b) for (p, a), b in zip(split(lo).items(), split(hi).values())}
    params = {k: np.asarray(v).tolist() for k, v in theta.items()}
    params[T] = 0.0
    return Game({p: m for p, m in zip(players, game.sizes)}, payoffs, params=params,
                lower=split(game.lower), upper=split(game.upper), search_box=box,
                name=f"{game.name or 'game'} ({kind} homotopy)")


def homotopy(game, params=None, *, kind: str = "interaction", x0=None, stability: bool = False,
             **options) -> Branch:
    """Follow an artificial homotopy from an easy game (``t = 0``) to ``game`` (``t = 1``).

    Parameters
    ----------
    game : Game
    params : dict, optional
        Parameter overrides of ``game``.
    kind : {"interaction", "newton"}
        See the module docstring.
    x0 : array (n,), optional
        The anchor actions; default the centre of the search region.
    stability : bool
        Label every point of the path (default False: only the end matters).
    **options
        Passed to :func:`equipoise.trace` (step sizes, tolerances).

    Returns
    -------
    Branch
        With ``status == "reached_end"``, ``branch.points[-1].x`` is a
        first-order point of ``game`` at ``params``; verify it with
        :func:`equipoise.verify` before relying on it.
    """
    if kind not in KINDS:
        raise InputError(f"kind: expected one of {', '.join(KINDS)}, got {kind!r}")
    theta = game.theta(params)
    lo, hi = (np.asarray(v) for v in game.region(theta))
    x0 = 0.5 * (lo + hi) if x0 is None else np.asarray(x0, dtype=float)
    if x0.shape != (game.n,):
        raise InputError(f"x0: expected {game.n} stacked actions, got shape {x0.shape}")
    easy = _embedded(game, theta, x0, kind)
    start = easy.theta({T: 0.0})
    res = newton_solve(easy, jnp.asarray(x0), start)
    x_start = np.asarray(res.x)
    if int(res.status) != Status.success.code:
        # Newton from x0 can stall (a flat own payoff at x0); take the nearest t = 0 solution instead.
        from ._solve import solve

        found = solve(easy, {T: 0.0}, starts=16, stability=False).equilibria
        if not found:
            raise InputError(f"the homotopy's starting problem (t = 0) did not solve from x0 or from 16 "
                             f"starts: {Status.from_code(int(res.status)).message}")
        x_start = min((e.x for e in found), key=lambda x: float(np.max(np.abs(x - x0))))
    return trace(easy, T, 0.0, 1.0, x_start, stability=stability, **options)
