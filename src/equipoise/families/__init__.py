"""Standard game families, each a function returning a :class:`~equipoise.Game`."""

from .allocation import allocation_efficiency, proportional_allocation
from .cournot import cournot
from .linear_bertrand import linear_bertrand
from .logit import logit_bertrand, logit_products, merged_ownership, ownership_matrix
from .minmax import minmax_quadratic
from .network import network_game
from .public_good import public_good
from .tullock import tullock

__all__ = ["allocation_efficiency", "cournot", "linear_bertrand", "logit_bertrand", "logit_products",
           "merged_ownership", "minmax_quadratic", "network_game", "ownership_matrix",
           "proportional_allocation", "public_good", "tullock"]
