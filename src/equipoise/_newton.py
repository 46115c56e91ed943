r"""Globalised semismooth Newton for the players' stacked KKT conditions.

For a maximiser with bounds :math:`l \le x \le u` and pseudo-gradient
:math:`F`, coordinate :math:`k` is at equilibrium when :math:`F_k = 0` inside
the box, :math:`F_k \le 0` at :math:`l_k`, :math:`F_k \ge 0` at :math:`u_k`.
With :math:`f = -F` and the Fischer--Burmeister function
:math:`\phi(a, b) = a + b - \sqrt{a^2 + b^2}` (zero iff :math:`a, b \ge 0`,
:math:`ab = 0`) the conditions become :math:`\Phi(x) = 0` with

* free: :math:`\Phi_k = F_k`;
* lower bound only: :math:`\phi(x_k - l_k, f_k)`;
* upper bound only: :math:`-\phi(u_k - x_k, -f_k)`;
* both: :math:`\phi(x_k - l_k, -\phi(u_k - x_k, -f_k))`.

Newton steps on :math:`\Phi` are globalised by an Armijo line search on
:math:`\psi = \tfrac12 \|\Phi\|^2`; when the Newton direction is not finite
or not a descent direction (singular Jacobian), a Levenberg--Marquardt step
with damping :math:`\|\Phi\|` is taken instead.

Two linear algebra paths compute the step (``linear=``):

* ``"dense"``: the Jacobian of :math:`\Phi` by forward mode (``n`` JVPs,
  which for a square system costs the same as reverse mode and keeps the
  memory of one pass) and an LU solve; about :math:`2n^3/3` flops a step
  (the Levenberg--Marquardt system is formed only when the Newton step fails).
* ``"krylov"``: matrix-free inexact Newton. The Newton system is solved by
  restarted GMRES on Jacobian-vector products (``jax.jvp``), never forming
  the Jacobian; the fallback solves the Levenberg--Marquardt normal equations
  by conjugate gradients on JVPs and VJPs. The cost of a step is a few dozen
  evaluations of :math:`\Phi`, so it grows like one evaluation (often
  :math:`O(n)`) when GMRES converges in few iterations, as it does for
  games whose Jacobian is a diagonal plus a few low-rank terms (logit demand).

References
----------
Dembo, Eisenstat & Steihaug (1982), "Inexact Newton methods", SIAM J. Numer.
Anal. 19(2) (the forcing term of the Krylov path).
Saad & Schultz (1986), "GMRES: a generalized minimal residual algorithm for
solving nonsymmetric linear systems", SIAM J. Sci. Stat. Comput. 7(3).
Qi & Sun (1993), "A nonsmooth version of Newton's method", Math. Programming.
De Luca, Facchinei & Kanzow (1996), "A semismooth equation approach to the
solution of nonlinear complementarity problems", Math. Programming.
"""

from __future__ import annotations

from typing import NamedTuple

import jax
import jax.numpy as jnp
import numpy as np
from jax import lax

from ._status import Status


class RootResult(NamedTuple):
    """Outcome of one Newton solve (a pytree: works under ``jit``/``vmap``).

    Attributes
    ----------
    x : array (n,)
        Final stacked actions.
    status : int array
        A :class:`Status` code; ``Status.from_code(status)`` gives the member.
    steps : int array
        Newton steps taken.
    residual : array
        Natural KKT residual :math:`\\|x - \\mathrm{clip}(x + F(x), l, u)\\|_\\infty`.
    """

    x: jax.Array
    status: jax.Array
    steps: jax.Array
    residual: jax.Array


@jax.custom_jvp
def _norm2(a, b):
    return jnp.sqrt(a * a + b * b)


@_norm2.defjvp
def _norm2_jvp(primals, tangents):
    # At (0, 0) the norm is not differentiable; 0 lies in its generalised
    # gradient, so the semismooth Newton step stays well defined.
    a, b = primals
    ta, tb = tangents
    r = jnp.sqrt(a * a + b * b)
    safe = jnp.where(r > 0, r, 1.0)
    return r, jnp.where(r > 0, (a * ta + b * tb) / safe, 0.0)


def _fb(a, b):
    # a + b - sqrt(a^2 + b^2) cancels catastrophically when a and b are both large and
    # positive (a runaway iterate would then look like a root); there the equal form
    # 2ab / (a + b + sqrt(a^2 + b^2)) is used.
    r = _norm2(a, b)
    s = a + b
    positive = s > 0
    return jnp.where(positive, 2.0 * a * b / jnp.where(positive, s + r, 1.0), s - r)


def complementarity(x, F, lower, upper):
    """The Fischer--Burmeister residual :math:`\\Phi(x)` described above."""
    fin_lo = np.isfinite(lower)
    fin_hi = np.isfinite(upper)
    lo = np.where(fin_lo, lower, 0.0)
    hi = np.where(fin_hi, upper, 0.0)
    f = -F
    only_lo = _fb(x - lo, f)
    only_hi = -_fb(hi - x, -f)
    both = _fb(x - lo, -_fb(hi - x, -f))
    return jnp.where(fin_lo & fin_hi, both, jnp.where(fin_lo, only_lo, jnp.where(fin_hi, only_hi, F)))


def natural_residual(x, F, lower, upper):
    """Projected-gradient residual :math:`x - \\mathrm{clip}(x + F, l, u)`."""
    return x - jnp.clip(x + F, jnp.asarray(lower), jnp.asarray(upper))


class _Loop(NamedTuple):
    x: jax.Array
    phi: jax.Array
    step: jax.Array
    status: jax.Array
    done: jax.Array


#: The linear algebra paths of :func:`newton_solve`.
LINEAR = ("dense", "krylov")

#: GMRES settings of the Krylov path: restart length and most restarts per Newton step.
KRYLOV_RESTART, KRYLOV_RESTARTS = 30, 4


def newton_solve(game, x0, theta=None, *, ftol=1e-10, xtol=1e-10, max_steps=100, linear="dense"):
    r"""Find a KKT point of ``game`` from ``x0`` by globalised semismooth Newton.

    Parameters
    ----------
    game : Game
    x0 : array (n,)
        Stacked starting actions.
    theta : dict, optional
        Parameter arrays (``game.theta(...)``); defaults if omitted.
    ftol : float
        Converged when :math:`\|\Phi\|_\infty \le` ``ftol`` :math:`(1 + \|F(x_0)\|_\infty)` ...
        (with the game's ``foc`` in place of ``F`` when it has one)
    xtol : float
        ... and the last Newton step satisfies
        :math:`\|\Delta x\|_\infty \le` ``xtol`` :math:`(1 + \|x\|_\infty)`.
        Requiring both rules out "roots at infinity", where payoffs flatten
        out and the gradient vanishes without an equilibrium.
    max_steps : int
    linear : {"dense", "krylov"}
        How each Newton step is computed (see the module notes): a dense
        Jacobian and LU, or matrix-free GMRES on Jacobian-vector products
        (for large games).

    Returns
    -------
    RootResult

    Notes
    -----
    Pure JAX: ``jax.jit`` and ``jax.vmap`` apply (over ``x0`` and ``theta``).

    Examples
    --------
    >>> import equipoise
    >>> game = equipoise.cournot(a=100.0, b=2.0, costs=[10.0, 20.0, 30.0])
    >>> res = equipoise.newton_solve(game, jnp.ones(3))
    >>> [round(float(q), 6) for q in res.x]
    [15.0, 10.0, 5.0]
    """
    if theta is None:
        theta = game.theta()
    x0 = jnp.asarray(x0, dtype=float)

    direction = _direction(linear)

    def residual_fn(x):
        return complementarity(x, game.solver_field(x, theta), game.lower, game.upper)

    return _finish(game, theta, _newton_loop(residual_fn, x0, _ftol_abs(game, x0, theta, ftol), xtol, max_steps,
                                             direction))


def _direction(linear):
    if linear == "dense":
        return _dense_direction
    if linear == "krylov":
        return _krylov_direction
    from ._errors import InputError

    raise InputError(f"linear: expected one of {', '.join(LINEAR)}, got {linear!r}")


def _dense_direction(residual_fn, x, phi):
    """Newton and Levenberg-Marquardt directions from the dense Jacobian; ``(d, J^T phi, finite)``."""
    jac = jax.jacfwd(residual_fn)(x)
    grad = jac.T @ phi
    d_newton = jnp.linalg.solve(jac, -phi)
    newton_ok = jnp.all(jnp.isfinite(d_newton)) & (grad @ d_newton < 0)

    def lm_direction():
        # The Levenberg-Marquardt system only when the Newton step fails (it costs J^T J and a
        # second factorisation). Its damping reads d_newton, so the two LAPACK calls stay in
        # sequence even where vmap turns this cond into a select (DEVELOPERS.md: independent
        # LAPACK calls in one graph can deadlock jaxlib's CPU thread pool).
        mu = jnp.linalg.norm(phi) + 0.0 * jnp.sum(jnp.where(jnp.isfinite(d_newton), d_newton, 0.0))
        return jnp.linalg.solve(jac.T @ jac + mu * jnp.eye(x.shape[0]), -grad)

    d = lax.cond(newton_ok, lambda: d_newton, lm_direction)
    return d, grad, jnp.all(jnp.isfinite(jac)) & jnp.all(jnp.isfinite(d))


def _krylov_direction(residual_fn, x, phi):
    """Matrix-free directions: GMRES on JVPs for Newton, CG on the normal equations for the
    Levenberg-Marquardt fallback; ``(d, J^T phi, finite)``."""
    from jax.scipy.sparse.linalg import cg, gmres

    _, jvp = jax.linearize(residual_fn, x)
    _, vjp = jax.vjp(residual_fn, x)
    grad = vjp(phi)[0]
    norm = jnp.linalg.norm(phi)
    # Forcing term eta_k = min(0.1, |Phi|): superlinear convergence near a regular root.
    forcing = jnp.minimum(0.1, norm)
    d_newton, _ = gmres(jvp, -phi, tol=forcing, atol=0.0, restart=min(KRYLOV_RESTART, x.shape[0]),
                        maxiter=KRYLOV_RESTARTS, solve_method="batched")
    newton_ok = (jnp.all(jnp.isfinite(d_newton)) & (grad @ d_newton < 0)
                 & (jnp.linalg.norm(jvp(d_newton) + phi) <= jnp.maximum(forcing, 0.5) * norm))

    def lm_direction():
        d_lm, _ = cg(lambda v: vjp(jvp(v))[0] + norm * v, -grad, tol=1e-6, maxiter=4 * KRYLOV_RESTART)
        return d_lm

    d = lax.cond(newton_ok, lambda: d_newton, lm_direction)
    return d, grad, jnp.all(jnp.isfinite(grad)) & jnp.all(jnp.isfinite(d))


def deflated_solve(game, x0, theta, roots, active, scale, *, power=2.0, shift=1.0,
                   ftol=1e-10, xtol=1e-10, max_steps=100):
    r"""Newton on the deflated system :math:`M(x) \Phi(x) = 0` (see :func:`newton_solve`).

    .. math:: M(x) = \prod_{k \,\text{active}} \left(\|(x - r_k) / w\|_2^{-p} + s\right)

    with the known roots :math:`r_k` (rows of ``roots`` where ``active``),
    widths :math:`w` = ``scale`` (distances are unit-free), ``p`` = ``power``
    and ``s`` = ``shift``. :math:`M \ge s^K`, so with ``shift >= 1`` a small
    deflated residual means a small true one; near a known root
    :math:`M \to \infty` and Newton is pushed away from it, so the same
    start can converge to a new root.

    Reference: Farrell, Birkisson & Funke (2015), "Deflation techniques for
    finding distinct solutions of nonlinear partial differential equations",
    SIAM J. Sci. Comput. 37(4).

    Parameters
    ----------
    roots : array (R, n)
        Known roots (a fixed-size buffer, so one compilation serves many rounds).
    active : bool array (R,)
        Which rows of ``roots`` are in use.
    scale : array (n,)
        Positive widths for the distances.

    Returns
    -------
    RootResult
        Its residual is the true (undeflated) natural residual.

    Notes
    -----
    Pure JAX: ``jax.jit`` and ``jax.vmap`` apply.
    """
    x0 = jnp.asarray(x0, dtype=float)
    roots = jnp.asarray(roots, dtype=float)
    active = jnp.asarray(active, dtype=bool)
    scale = jnp.asarray(scale, dtype=float)

    def multiplier(x):
        d2 = jnp.sum(((x[None, :] - roots) / scale) ** 2, axis=1)
        factor = d2 ** (-0.5 * power) + shift
        return jnp.prod(jnp.where(active, factor, 1.0))

    def residual_fn(x):
        return multiplier(x) * complementarity(x, game.solver_field(x, theta), game.lower, game.upper)

    return _finish(game, theta, _newton_loop(residual_fn, x0, _ftol_abs(game, x0, theta, ftol), xtol, max_steps,
                                             _dense_direction))


def _ftol_abs(game, x0, theta, ftol):
    scale = 1.0 + jnp.max(jnp.abs(game.solver_field(x0, theta)))
    return ftol * jnp.where(jnp.isfinite(scale), scale, 1.0)


def _finish(game, theta, out: _Loop) -> RootResult:
    # Semismooth Newton may approach a corner from outside; actions never leave the box.
    lower, upper = game.lower, game.upper
    x = jnp.clip(out.x, jnp.asarray(lower), jnp.asarray(upper))
    F = game.pseudo_gradient(x, theta)
    res = jnp.max(jnp.abs(natural_residual(x, F, lower, upper)))
    return RootResult(x, out.status, out.step, res)


def _newton_loop(residual_fn, x0, ftol_abs, xtol, max_steps, direction) -> _Loop:
    """The globalised Newton iteration on ``residual_fn`` from ``x0`` (a ``lax.while_loop``);
    ``direction(residual_fn, x, phi) -> (d, J^T phi, finite)`` computes each step."""
    phi0 = residual_fn(x0)

    def merit(phi):
        v = 0.5 * jnp.sum(phi * phi)
        return jnp.where(jnp.isfinite(v), v, jnp.inf)

    def body(s: _Loop) -> _Loop:
        phi = s.phi
        d, grad, finite = direction(residual_fn, s.x, phi)
        psi = merit(phi)
        slope = grad @ d
        small_phi = jnp.max(jnp.abs(phi)) <= ftol_abs
        small_step = jnp.max(jnp.abs(d)) <= xtol * (1.0 + jnp.max(jnp.abs(s.x)))

        def ls_cond(c):
            t, _, psi_t, k = c
            return (psi_t > psi + 1e-4 * t * slope) & (k < 40)

        def ls_body(c):
            t, _, _, k = c
            t = 0.5 * t
            phi_t = residual_fn(s.x + t * d)
            return t, phi_t, merit(phi_t), k + 1

        phi1 = residual_fn(s.x + d)
        t, phi_new, psi_new, k = lax.while_loop(ls_cond, ls_body, (1.0, phi1, merit(phi1), 0))
        ls_ok = (psi_new <= psi + 1e-4 * t * slope) & jnp.isfinite(psi_new)
        converged = small_phi & small_step
        # A converged point takes its final (tiny) full step.
        x_new = jnp.where(converged, s.x + d, jnp.where(ls_ok, s.x + t * d, s.x))
        phi_next = jnp.where(converged, residual_fn(x_new), jnp.where(ls_ok, phi_new, phi))
        status = jnp.where(
            converged,
            Status.success.code,
            jnp.where(~finite, Status.nonfinite.code,
                      jnp.where(~ls_ok & ~small_phi, Status.line_search_failed.code, Status.max_steps.code)),
        )
        done = converged | ~finite | (~ls_ok & ~small_phi)
        return _Loop(x_new, phi_next, s.step + 1, status, done)

    def cond(s: _Loop):
        return (~s.done) & (s.step < max_steps)

    init = _Loop(x0, phi0, jnp.asarray(0), jnp.asarray(Status.max_steps.code),
                 ~jnp.all(jnp.isfinite(phi0)))
    init = init._replace(status=jnp.where(init.done, Status.nonfinite.code, init.status))
    out = lax.while_loop(cond, body, init)
    return out
