"""Three invented villages in the Marrow Valley bid for a shared 40-unit radio backhaul.

Proportional allocation: each village's bid buys capacity 40 * bid / total bids, and
its value of d units is a * s * log(1 + d / s) (a: value of the first unit, s: the
amount at which that value has halved). Villages anticipate how their bid moves the
price. Compare the equilibrium with the best division using
``equipoise.families.allocation_efficiency``. Invented scenario and numbers.
"""

from equipoise.families import proportional_allocation

game = proportional_allocation(
    a=[3.0, 2.2, 1.1],
    s=[12.0, 25.0, 6.0],
    capacity=40.0,
    names=["upper_marrow", "kestle", "brackenford"],
)
