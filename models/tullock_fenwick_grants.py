"""Four invented laboratories compete for the Fenwick Foundation's research grant.

A Tullock contest: each lab spends proposal effort (in thousands of crowns) and wins
with probability effort^r / total effort^r. The grant is worth more to labs that
would build on it: 90, 75, 60 and 20 thousand crowns. With r = 1 the small Quarry
Lane lab stays out; raise r (a sharper review panel) to see equilibria change.
All labs, places and numbers are invented for the demonstration.
"""

from equipoise.families import tullock

game = tullock(
    values=[90.0, 75.0, 60.0, 20.0],
    r=1.0,
    names=["ashgrove", "millbrook", "tern_point", "quarry_lane"],
)
