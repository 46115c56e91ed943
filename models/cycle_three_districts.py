"""Three invented irrigation districts on the Quillon river draw water in a cycle of harm.

Each district's draw x_i earns r_i x_i - d_i x_i^2 / 2 and lowers the value of the
next district's water: u_i = r_i x_i - d_i x_i^2 / 2 - k x_i x_{i+1} (indices mod 3).
The game Jacobian is constant, J = -[[d_1, k, 0], [0, d_2, k], [k, 0, d_3]]: the
unique equilibrium is stable at equal adjustment speeds for small k, and depending
on d and k may become fragile (some per-district speeds destabilise) before it is
unstable at equal speeds. All names and numbers are invented.
"""

import jax.numpy as jnp

from equipoise import Game

DISTRICTS = ["upper_quillon", "middle_quillon", "lower_quillon"]


def payoffs(x, theta):
    w = jnp.concatenate([x[p] for p in DISTRICTS])
    harm = theta["k"] * w * jnp.roll(w, -1)
    u = theta["r"] * w - 0.5 * theta["d"] * w * w - harm
    return {p: u[i] for i, p in enumerate(DISTRICTS)}


game = Game(
    players={p: 1 for p in DISTRICTS},
    payoffs=payoffs,
    params={"r": [6.0, 5.0, 7.0], "d": [1.0, 1.0, 9.0], "k": 2.0},
    search_box={p: (-100.0, 100.0) for p in DISTRICTS},
    name="water draws on the Quillon",
)
