"""Outcome codes shared by every solver.

Each member's value is the human message (empty for success). Under ``jit``
and ``vmap`` outcomes travel as integer codes (``Status.x.code``); turn a code
back into a member with :meth:`Status.from_code`.
"""

import enum

import numpy as np


class Status(enum.Enum):
    """Outcome of a solve; the value is the message shown to users."""

    success = ""
    max_steps = (
        "the maximum number of Newton steps was reached before the residual "
        "and the step fell below tolerance"
    )
    line_search_failed = (
        "the line search could not decrease the residual: the start led to a "
        "local minimum of the merit function that is not an equilibrium"
    )
    nonfinite = "the payoff gradient or its Jacobian became non-finite"
    no_equilibrium = "no starting point converged to an equilibrium"

    @property
    def code(self) -> int:
        return _CODES[self]

    @property
    def message(self) -> str:
        return self.value or "success"

    @classmethod
    def from_code(cls, code) -> "Status":
        return _MEMBERS[int(np.asarray(code))]


_MEMBERS = tuple(Status)
_CODES = {member: i for i, member in enumerate(_MEMBERS)}


class Nash(enum.Enum):
    """Verification label of a first-order point.

    ``global``: no player found a profitable deviation anywhere in its action
    set (or search box); ``local``: each player's second-order condition holds
    but a profitable deviation away from the point was found, or could not be
    checked; ``not_nash``: some player can improve on the point.
    """

    global_ = "global"
    local = "local"
    not_nash = "not_nash"

    @property
    def code(self) -> int:
        return _NASH_CODES[self]

    @classmethod
    def from_code(cls, code) -> "Nash":
        return _NASH_MEMBERS[int(np.asarray(code))]


_NASH_MEMBERS = tuple(Nash)
_NASH_CODES = {member: i for i, member in enumerate(_NASH_MEMBERS)}
