"""Linear-quadratic games on a network (Bramoulle, Kranton & D'Amours 2014)."""

from __future__ import annotations

from collections.abc import Sequence

import jax.numpy as jnp
import numpy as np

from .._errors import InputError
from .._game import Game
from ._names import player_names


def network_game(G: Sequence[Sequence[float]], delta: float = 0.5, names: Sequence[str] | None = None) -> Game:
    r"""Network game: agent :math:`i` chooses :math:`x_i \ge 0`, affected by its neighbours' actions.

    .. math:: u_i = x_i - \tfrac12 x_i^2 - \delta\, x_i \textstyle\sum_j g_{ij} x_j .

    :math:`\delta > 0` makes neighbours' actions substitutes (the best
    response :math:`\max(0, 1 - \delta (Gx)_i)` falls as they rise),
    :math:`\delta < 0` complements.

    Parameters
    ----------
    G : square matrix
        Link weights :math:`g_{ij}` (parameter ``G``), zero diagonal; need not
        be symmetric. Its size sets the number of agents.
    delta : float
        Strength of the interaction (parameter ``delta``).
    names : sequence of str, optional
        Agent names, default ``agent1 .. agentN``.

    Returns
    -------
    Game
        Actions are bounded below by 0. The search box is :math:`[0, 1.5]`
        for substitutes (no best response exceeds 1) and
        :math:`[0, 1.5 / \max(1 - |\delta| \max_i \sum_j |g_{ij}|, 0.1)]`
        for complements.

    Notes
    -----
    The equilibrium is unique iff :math:`\delta |\lambda_{\min}(G)| < 1`
    for symmetric :math:`G` and :math:`\delta > 0`; every equilibrium solves
    :math:`(I + \delta G_{SS}) x_S = 1` on its support :math:`S`, with
    :math:`1 - \delta (G x)_i \le 0` off it (Bramoulle, Kranton & D'Amours
    2014, "Strategic interaction and networks").

    Examples
    --------
    >>> game = network_game([[0.0, 1.0], [1.0, 0.0]], delta=2.0)
    >>> game.players
    ('agent1', 'agent2')
    """
    try:
        g = np.asarray(G, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"G: expected a square matrix of numbers, got {G!r}") from None
    if g.ndim != 2 or g.shape[0] != g.shape[1] or g.shape[0] < 2:
        raise InputError(f"G: expected a square matrix with at least two rows, got shape {g.shape}")
    if not np.all(np.isfinite(g)):
        raise InputError("G: expected finite link weights")
    if np.any(np.diag(g) != 0):
        raise InputError(f"G: expected a zero diagonal (no self-links), got {np.diag(g).tolist()}")
    n = g.shape[0]
    players = player_names(names, n, prefix="agent")

    def payoffs(x, theta):
        e = jnp.concatenate([x[p] for p in players])
        u = e - 0.5 * e * e - theta["delta"] * e * (theta["G"] @ e)
        return {p: u[i] for i, p in enumerate(players)}

    def box(theta):
        pull = jnp.maximum(-theta["delta"], 0.0) * jnp.max(jnp.sum(jnp.abs(theta["G"]), axis=1))
        top = 1.5 / jnp.maximum(1.0 - pull, 0.1)
        return {p: (0.0, top) for p in players}

    return Game(
        players={p: 1 for p in players},
        payoffs=payoffs,
        params={"G": g.tolist(), "delta": float(delta)},
        lower={p: 0.0 for p in players},
        search_box=box,
        name="network_game",
    )
