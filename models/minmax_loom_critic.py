"""An invented generator ("loom") and critic ("sieve") near a point of their training game.

The local model of adversarial training, f(x, y) = a x^2 / 2 + b x y - c y^2 / 2, where
the loom minimises f and the sieve maximises it. With the defaults (a = 0.5, b = 2,
c = 0.25) f is convex in x and concave in y: the origin is a saddle point, a Nash
equilibrium, and gradient descent-ascent spirals into it at any pair of speeds.
``--set a=-2 --set c=1`` gives f = -x^2 + 2 x y - y^2 / 2: the origin is then a local min-max
point but not a Nash equilibrium (the loom's own problem is concave there), and
descent-ascent converges to it only when the sieve learns more than twice as fast as
the loom (``player_speeds.stable_ratios`` in the stability report). Invented scenario.
"""

from equipoise.families import minmax_quadratic

game = minmax_quadratic(a=0.5, b=2.0, c=0.25, names=["loom", "sieve"])
