"""Bread pricing in the invented town of Valemont (multi-product logit Bertrand).

Larkspur Ovens sells a sourdough and a rye; Copperkettle and Millbrook sell
one loaf each. Ownership defines the players: each bakery sets the prices of
its own loaves. All names and numbers are invented.
"""

from equipoise import logit_bertrand

game = logit_bertrand(
    delta=[2.0, 1.4, 1.8, 1.1],          # mean utility of each loaf
    alpha=0.8,                           # price sensitivity
    costs=[1.5, 1.2, 1.4, 1.0],          # marginal cost of each loaf
    owner=["larkspur", "larkspur", "copperkettle", "millbrook"],
    market_size=1000.0,                  # shoppers per day
)
