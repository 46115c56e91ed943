"""Valemont bread pricing with ownership as a parameter, ready for merger counterfactuals.

The same invented market as logit_valemont_bakeries.py, written product by product:
each loaf's price is set to maximise its owner's profit, weighted by the ownership
matrix (parameter ``ownership``). A merger of Copperkettle and Millbrook is the
counterfactual

    equipoise counterfactual models/logit_valemont_products.py \\
        --to 'ownership=[[1,1,0,0],[1,1,0,0],[0,0,1,1],[0,0,1,1]]'

(``equipoise.merged_ownership(OWNER, ["copperkettle", "millbrook"])`` builds the matrix).
All names and numbers are invented.
"""

from equipoise import logit_products

OWNER = ["larkspur", "larkspur", "copperkettle", "millbrook"]

game = logit_products(
    delta=[2.0, 1.4, 1.8, 1.1],
    alpha=0.8,
    costs=[1.5, 1.2, 1.4, 1.0],
    owner=OWNER,
    names=["larkspur_sourdough", "larkspur_rye", "copperkettle_loaf", "millbrook_loaf"],
    market_size=1000.0,
)
