"""Five invented hamlets along the Skerrow coast keep watch for storms.

A linear-quadratic network game: each hamlet's watch effort x_i >= 0 pays
x_i - x_i^2 / 2, less delta * x_i times the watch kept by the hamlets next to it
(a neighbour's watch covers you, so efforts are substitutes). The coast is a line,
so the two end hamlets have one neighbour each. With delta = 1.2 nine
equilibria coexist (``solve --all`` finds them). Invented places and numbers.
"""

from equipoise.families import network_game

HAMLETS = ["gull_end", "sandwick", "oar_hollow", "pilchard", "north_skerrow"]
LINE = [[1.0 if abs(i - j) == 1 else 0.0 for j in range(5)] for i in range(5)]

game = network_game(LINE, delta=1.2, names=HAMLETS)
