"""equipoise: Nash equilibria of continuous-action games, found and verified.

float64 is switched on at import: equilibrium verification and stability
margins need it.
"""

import jax as _jax

_jax.config.update("jax_enable_x64", True)

from ._continuation import Branch, BranchPoint, Event, trace, trace_between  # noqa: E402
from ._errors import InputError  # noqa: E402
from ._game import Game  # noqa: E402
from ._homotopy import homotopy  # noqa: E402
from ._loader import load_game  # noqa: E402
from ._newton import RootResult, newton_solve  # noqa: E402
from ._fixed_point import fixed_point_solve  # noqa: E402
from ._solve import Equilibrium, Solution, solve  # noqa: E402
from ._status import Nash, Outcome, PointStatus, Status  # noqa: E402
from ._verify import Verification, verify  # noqa: E402
from ._counterfactual import Counterfactual, counterfactual  # noqa: E402
from .sweeps import Axis, SweepResult, SweepSpec, sweep  # noqa: E402
from .dynamics import Basins, Simulation, basins, simulate  # noqa: E402
from .families import (  # noqa: E402
    allocation_efficiency, cournot, linear_bertrand, logit_bertrand, logit_products, merged_ownership,
    minmax_quadratic, network_game, ownership_matrix, proportional_allocation, public_good, tullock)

__version__ = "0.1.0"

__all__ = [
    "allocation_efficiency",
    "minmax_quadratic",
    "network_game",
    "proportional_allocation",
    "public_good",
    "tullock",
    "Axis",
    "Basins",
    "Branch",
    "Counterfactual",
    "BranchPoint",
    "Event",
    "Equilibrium",
    "Game",
    "InputError",
    "Nash",
    "Outcome",
    "PointStatus",
    "RootResult",
    "Simulation",
    "Solution",
    "Status",
    "SweepResult",
    "SweepSpec",
    "Verification",
    "basins",
    "counterfactual",
    "cournot",
    "fixed_point_solve",
    "homotopy",
    "linear_bertrand",
    "load_game",
    "logit_bertrand",
    "logit_products",
    "merged_ownership",
    "newton_solve",
    "ownership_matrix",
    "simulate",
    "solve",
    "sweep",
    "trace",
    "trace_between",
    "verify",
]
