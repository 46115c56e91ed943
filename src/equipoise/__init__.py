"""equipoise: Nash equilibria of continuous-action games, found and verified.

float64 is switched on at import: equilibrium verification and stability
margins need it.
"""

import jax as _jax

_jax.config.update("jax_enable_x64", True)

from ._errors import InputError  # noqa: E402
from ._game import Game  # noqa: E402
from ._status import Nash, Outcome, PointStatus, Status  # noqa: E402

# The other public names are imported on first use: a command that solves one
# model should not pay for the sweep, dynamics and continuation machinery (and
# their imports) at start-up.
_LAZY = {
    "Branch": "._continuation", "BranchPoint": "._continuation", "Event": "._continuation",
    "trace": "._continuation", "trace_between": "._continuation",
    "homotopy": "._homotopy",
    "load_game": "._loader",
    "RootResult": "._newton", "newton_solve": "._newton",
    "fixed_point_solve": "._fixed_point",
    "Equilibrium": "._solve", "Solution": "._solve", "solve": "._solve",
    "Verification": "._verify", "verify": "._verify",
    "Counterfactual": "._counterfactual", "counterfactual": "._counterfactual",
    "Axis": ".sweeps", "SweepResult": ".sweeps", "SweepSpec": ".sweeps", "sweep": ".sweeps",
    "Basins": ".dynamics", "Simulation": ".dynamics", "basins": ".dynamics", "simulate": ".dynamics",
    **dict.fromkeys(("allocation_efficiency", "cournot", "linear_bertrand", "logit_bertrand", "logit_products",
                     "merged_ownership", "minmax_quadratic", "network_game", "ownership_matrix",
                     "proportional_allocation", "public_good", "tullock"), ".families"),
}

from ._lazy import lazy_names as _lazy_names  # noqa: E402

__getattr__, __dir__ = _lazy_names(__name__, globals(), _LAZY)


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
