"""Three neighbouring farms on the invented Brindle common choose grazing effort.

A linear-quadratic game on a triangle: each farm's effort crowds out its
neighbours' (u_i = x_i - x_i^2/2 - delta x_i sum_j g_ij x_j, x_i >= 0), so
several equilibria coexist: one farm grazes alone, two share, or all three.
A model written directly with the Game constructor. Invented scenario.
"""

import jax.numpy as jnp

from equipoise import Game

FARMS = ["north_field", "mill_field", "east_field"]
LINKS = jnp.array([[0.0, 1.0, 1.0], [1.0, 0.0, 1.0], [1.0, 1.0, 0.0]])


def payoffs(x, theta):
    e = jnp.concatenate([x[f] for f in FARMS])
    crowding = theta["delta"] * e * (LINKS @ e)
    u = e - 0.5 * e * e - crowding
    return {f: u[i] for i, f in enumerate(FARMS)}


game = Game(
    players={f: 1 for f in FARMS},
    payoffs=payoffs,
    params={"delta": 1.5},
    lower={f: 0.0 for f in FARMS},
    search_box={f: (0.0, 2.0) for f in FARMS},
    name="grazing on the Brindle common",
)
