"""Outcome codes shared by every solver, and the Nash verification labels.

Each member's value is the human message or label. Under ``jit`` and ``vmap``
members travel as integer codes (``Status.x.code``, the member's position);
turn a code back into a member with ``Status.from_code``.
"""

import enum

import numpy as np


class _Coded(enum.Enum):
    @property
    def code(self) -> int:
        return list(type(self)).index(self)

    @classmethod
    def from_code(cls, code):
        return list(cls)[int(np.asarray(code))]


class Status(_Coded):
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
    def message(self) -> str:
        return self.value or "success"


class Nash(_Coded):
    """Verification label of a first-order point.

    ``global``: no player found a profitable deviation anywhere in its action
    set (or search box); ``local``: each player's second-order condition holds
    but a profitable deviation away from the point was found, or could not be
    checked; ``not_nash``: some player can improve on the point.
    """

    global_ = "global"
    local = "local"
    not_nash = "not_nash"


class PointStatus(_Coded):
    """Outcome of one point of a sweep; the value is the message shown to users.

    ``solved``: at least one equilibrium passed verification (not ``not_nash``);
    ``no_equilibrium``: no start converged to one (first-order points that
    failed verification are still stored, marked); ``failed``: the point could
    not be solved at all (a non-finite search region or non-finite payoffs
    everywhere); the store keeps the reason.
    """

    solved = ""
    no_equilibrium = "no start converged to a point that passed verification"
    failed = "the point could not be solved"

    @property
    def message(self) -> str:
        return self.value or "solved"


class Outcome(_Coded):
    """How a simulated learning or adjustment run ended; the value is the criterion, in words.

    Distances are scaled by ``1 + max|x*|`` (the equilibrium's size) or by the
    search region's size; see :func:`equipoise.simulate` for the thresholds.
    """

    converged = "ended within tolerance of an equilibrium (or of a stationary point) and stayed there"
    cycling = "kept moving back and forth without settling and without decaying: an oscillation or a cycle"
    diverged = "moved far away: non-finite, beyond the blow-up size, or its distance from the start grew by the blow-up factor"
    undecided = "neither settled nor clearly diverging or cycling by the end of the horizon"
