"""Three teahouses on the invented Quillon square set prices for a pot of tea.

Linear differentiated demand q_i = a_i - b p_i + d * (sum of rivals' prices).
All names and numbers are invented.
"""

from equipoise import linear_bertrand

game = linear_bertrand(
    a=[40.0, 36.0, 30.0],
    b=4.0,
    d=1.2,
    costs=[2.0, 1.8, 2.5],
    names=["jasmine_door", "kettle_and_crane", "the_lantern"],
)
