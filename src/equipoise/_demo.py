"""The built-in demonstration scenario (invented firms and numbers)."""

from .families import logit_bertrand


def demo_game():
    """Bread pricing in the invented town of Valemont.

    Four loaves sold by three bakeries: Larkspur Ovens owns two, Copperkettle
    and Millbrook one each. Logit demand with price coefficient 0.8 per
    currency unit; every number is made up for the demonstration.
    """
    game = logit_bertrand(
        delta=[2.0, 1.4, 1.8, 1.1],
        alpha=0.8,
        costs=[1.5, 1.2, 1.4, 1.0],
        owner=["larkspur", "larkspur", "copperkettle", "millbrook"],
        market_size=1000.0,
    )
    game.name = "demo: bread pricing in Valemont (invented)"
    return game
