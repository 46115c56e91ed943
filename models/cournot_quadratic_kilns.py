"""Four brick kilns in the invented Ashby valley with rising (quadratic) costs.

Each kiln's cost is c q + (d/2) q^2; the steep cost of the oldest kiln
(Old Tannery) limits its output. All names and numbers are invented.
"""

from equipoise import cournot

game = cournot(
    a=90.0,
    b=0.8,
    costs=[12.0, 14.0, 10.0, 16.0],
    quadratic=[0.4, 0.2, 1.5, 0.3],
    names=["redcliff", "stonegate", "old_tannery", "marlow"],
)
