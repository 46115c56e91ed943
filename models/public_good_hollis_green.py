"""Four invented neighbours on Hollis Row fund a shared green by voluntary gifts.

Each gives x_i between 0 and their budget w_i and enjoys a_i * log(1 + total gifts);
only the neighbours who value the green most end up giving (Mrs Ambrey's budget
binds, so Mr Tolley tops up the rest). Invented people and numbers.
"""

from equipoise.families import public_good

game = public_good(
    a=[7.0, 5.5, 3.0, 2.0],
    wealth=[3.0, 8.0, 8.0, 6.0],
    names=["ambrey", "tolley", "pennick", "sowerby"],
)
