r"""Exact per-coordinate (D-)stability criteria for 2 x 2 and 3 x 3 Jacobians.

With :math:`B = -J`, :math:`b_{ii}` its diagonal and :math:`B_{jk}` its
principal 2-minors:

* :math:`n = 2`: :math:`J` is D-stable iff :math:`a_{11} \le 0`,
  :math:`a_{22} \le 0`, :math:`a_{11} + a_{22} < 0`, :math:`\det J > 0`
  (trace and determinant of :math:`DJ` over all positive :math:`D`).
* :math:`n = 3`: Routh--Hurwitz on :math:`DJ` and Cauchy--Schwarz give:
  D-stable iff :math:`B \in P_0^+` and
  :math:`\sqrt{b_{11}B_{23}} + \sqrt{b_{22}B_{13}} + \sqrt{b_{33}B_{12}} \ge \sqrt{\det B}`;
  when the inequality fails, :math:`d_i \propto \sqrt{B_{jk}/b_{ii}}` destabilises.
  Equality suffices when the Cauchy--Schwarz bound cannot be attained by a
  positive finite :math:`d` (some :math:`i` has exactly one of
  :math:`b_{ii}, B_{jk}` zero).

Each function returns ``(holds, margin, speeds)``: whether the criterion holds
with a margin above the tolerance, the scaled margin, and candidate
destabilising speeds (normalised to max 1) for when it fails.
"""

from __future__ import annotations

import jax.numpy as jnp


def dstable_2x2(J, tol=1e-10):
    s = jnp.maximum(jnp.linalg.norm(J), 1e-300)
    a11, a22 = J[0, 0] / s, J[1, 1] / s
    det = (J[0, 0] * J[1, 1] - J[0, 1] * J[1, 0]) / s**2
    margin = jnp.minimum(jnp.minimum(-a11, -a22), jnp.minimum(-(a11 + a22), det))
    # Destabilising speeds: a positive diagonal entry dominates when its own
    # coordinate is fast; a non-positive determinant needs no help.
    speeds = jnp.where(a11 > 0, jnp.array([1.0, 1e-3]),
                       jnp.where(a22 > 0, jnp.array([1e-3, 1.0]), jnp.array([1.0, 1.0])))
    holds = (-a11 >= -tol) & (-a22 >= -tol) & (-(a11 + a22) > tol) & (det > tol)
    return holds, margin, speeds


def _two_minors(B):
    B23 = B[1, 1] * B[2, 2] - B[1, 2] * B[2, 1]
    B13 = B[0, 0] * B[2, 2] - B[0, 2] * B[2, 0]
    B12 = B[0, 0] * B[1, 1] - B[0, 1] * B[1, 0]
    return jnp.array([B23, B13, B12])


def dstable_3x3(J, tol=1e-10):
    s = jnp.maximum(jnp.linalg.norm(J), 1e-300)
    B = -J / s
    b = jnp.diag(B)
    m2 = _two_minors(B)
    det = jnp.linalg.det(B)
    p0 = jnp.all(b >= -tol) & jnp.all(m2 >= -tol) & (det > tol) & (jnp.sum(b) > tol) & (jnp.sum(m2) > tol)
    cain = jnp.sum(jnp.sqrt(jnp.maximum(b * m2, 0.0))) - jnp.sqrt(jnp.maximum(det, 0.0))
    # Equality is enough when Cauchy-Schwarz cannot be tight for positive finite d: some i
    # has exactly one of b_ii, B_jk zero (b_ii d_i^2 proportional to B_jk is impossible).
    zero_b = jnp.abs(b) <= 1e-13
    zero_m = jnp.abs(m2) <= 1e-13
    unattained = jnp.any(zero_b != zero_m)
    holds = p0 & ((cain > tol) | ((cain >= -tol) & unattained))
    d = jnp.sqrt(jnp.maximum(m2, 0.0) / jnp.maximum(b, 1e-300))
    d = jnp.where(jnp.all(jnp.isfinite(d)) & (jnp.max(d) > 0), d / jnp.max(d), jnp.ones(3))
    return holds, cain, d
