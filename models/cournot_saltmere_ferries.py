"""Three ferry operators on the invented Saltmere crossing compete in daily sailings.

Linear inverse demand for crossings (fare = 120 - 1.5 * total sailings) and
constant marginal costs; Gullwing's higher cost keeps it small. All firms,
places and numbers are invented for the demonstration.
"""

from equipoise import cournot

game = cournot(
    a=120.0,
    b=1.5,
    costs=[18.0, 24.0, 45.0],
    names=["bluewake", "harrowline", "gullwing"],
)
