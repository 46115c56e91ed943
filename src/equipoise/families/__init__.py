"""Standard game families, each a function returning a :class:`~equipoise.Game`."""

from .cournot import cournot
from .linear_bertrand import linear_bertrand
from .logit import logit_bertrand, logit_products, merged_ownership, ownership_matrix

__all__ = ["cournot", "linear_bertrand", "logit_bertrand", "logit_products", "merged_ownership", "ownership_matrix"]
