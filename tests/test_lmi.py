"""The barrier method for structured Lyapunov inequalities: certificates and the proofs of their absence."""

import jax
import jax.numpy as jnp
import numpy as np
import pytest

from equipoise.stability._lmi import basis, lyapunov_lmi

LYAPUNOV_TOL = 1e-9
DUAL_TOL = 1e-10


def _certificate_holds(J, P, blocks):
    """P positive definite on the block pattern with P J + J^T P negative definite (numpy eigenvalues)."""
    P = np.asarray(P)
    owner = np.repeat(np.arange(len(blocks)), blocks)
    if np.any(P[owner[:, None] != owner[None, :]] != 0) or np.linalg.eigvalsh(P)[0] <= 0:
        return False
    Q = P @ J + J.T @ P
    return np.linalg.eigvalsh(Q)[-1] < -LYAPUNOV_TOL * np.linalg.norm(P) * np.linalg.norm(J)


def _obstruction_holds(J, X, blocks, traces=False):
    """X positive semidefinite with every diagonal block of J X + X J^T positive semidefinite
    (``traces``: with a nonnegative trace, the dual condition for one weight per player)."""
    X = 0.5 * (np.asarray(X) + np.asarray(X).T)
    if np.linalg.eigvalsh(X)[0] < -DUAL_TOL * np.trace(X):
        return False
    S = J @ X + X @ J.T
    edges = np.cumsum((0,) + tuple(blocks))
    scale = np.linalg.norm(J) * np.trace(X)
    low = (lambda B: np.trace(B)) if traces else (lambda B: np.linalg.eigvalsh(B)[0])
    return all(low(S[a:b, a:b]) >= -DUAL_TOL * scale for a, b in zip(edges[:-1], edges[1:]))


def _run(J, blocks, structure):
    P, bound, X = lyapunov_lmi(jnp.asarray(J, dtype=float), tuple(blocks), structure)
    return np.asarray(P), float(bound), np.asarray(X)


@pytest.mark.parametrize("J, stable", [
    # Barker, Berman & Plemmons (1978), "Positive diagonal solutions to the Lyapunov equations",
    # Linear and Multilinear Algebra 5 (memory): a 2x2 matrix is diagonally stable iff
    # a11 < 0, a22 < 0 and det > 0. Cases on both sides of each inequality.
    ([[-1.0, 5.0], [-3.0, -2.0]], True),
    ([[-1.0, 2.0], [0.4, -1.0]], True),      # det 0.2 > 0
    ([[-1.0, 2.0], [0.6, -1.0]], False),     # det -0.2 < 0
    ([[0.1, 2.0], [-3.0, -2.0]], False),     # a11 > 0 (Hurwitz, yet no diagonal P)
    ([[0.0, 1.0], [-1.0, -1.0]], False),     # a11 = 0: only semidefinite P J + J^T P
])
def test_2x2_diagonal_stability(J, stable):
    J = np.asarray(J)
    P, bound, X = _run(J, (1, 1), "diagonal")
    if stable:
        assert bound < 0
        assert _certificate_holds(J, np.diag(np.diag(P)), (1, 1))
    else:
        assert not _certificate_holds(J, np.diag(np.diag(P)), (1, 1))
        assert _obstruction_holds(J, X, (1, 1))


def test_worked_3x3_dstable_matrix_has_no_diagonal_lyapunov():
    # REFERENCES.md worked instance (built from the trace argument there): no diagonal P exists.
    J = np.array([[-1.0, -2.0, 2.0], [3.0, -2.0, 1.0], [1.0, 3.0, -3.0]])
    P, bound, X = _run(J, (1, 1, 1), "diagonal")
    assert bound > 0
    assert _obstruction_holds(J, X, (1, 1, 1))
    np.testing.assert_allclose(np.trace(X), 1.0, atol=1e-12)


def test_hurwitz_metzler_matrix_is_diagonally_stable():
    # Berman & Plemmons, Nonnegative Matrices in the Mathematical Sciences, ch. 6 (memory):
    # a Hurwitz matrix with nonnegative off-diagonal entries is diagonally stable.
    rng = np.random.default_rng(3)
    M = rng.uniform(0, 1, size=(6, 6))
    np.fill_diagonal(M, 0.0)
    J = M - (np.max(np.linalg.eigvals(M).real) + 0.05) * np.eye(6)
    P, bound, _ = _run(J, (1,) * 6, "diagonal")
    assert bound < 0
    assert _certificate_holds(J, P, (1,) * 6)


def test_symmetric_negative_definite_has_block_certificate():
    # Common practice: P = I works for symmetric negative definite J, so the problem is feasible.
    rng = np.random.default_rng(4)
    M = rng.normal(size=(5, 5))
    J = -(M @ M.T + 0.1 * np.eye(5))
    P, bound, _ = _run(J, (2, 3), "block")
    assert bound < 0
    assert _certificate_holds(J, P, (2, 3))


def test_per_player_fragile_matrix_has_no_block_certificate():
    # REFERENCES.md worked instance: D = diag(g, g, 1) destabilises for g in (1.9015, 42.5985), so
    # with players' blocks (2, 1) no block-diagonal Lyapunov matrix can exist.
    J = np.array([[-1.0, 0.0, -5.0], [-5.0, -1.0, 0.0], [0.0, -5.0, -9.0]])
    assert np.max(np.linalg.eigvals(np.diag([9.0, 9.0, 1.0]) @ J).real) > 0
    P, bound, X = _run(J, (2, 1), "block")
    assert bound > 0
    assert not _certificate_holds(J, P, (2, 1))
    assert _obstruction_holds(J, X, (2, 1))


def test_not_hurwitz_means_no_weights_of_any_structure():
    # Common practice (Lyapunov's theorem): P > 0 with P J + J^T P < 0 forces J Hurwitz.
    J = np.array([[1.5, 1.0, 0.0], [-1.0, -1.0, 0.3], [0.2, 0.0, -2.0]])
    assert np.max(np.linalg.eigvals(J).real) > 0
    for blocks, structure in [((1, 1, 1), "diagonal"), ((2, 1), "block"), ((2, 1), "player")]:
        P, bound, X = _run(J, blocks, structure)
        assert bound > 0
        assert _obstruction_holds(J, X, (1, 1, 1) if structure == "diagonal" else blocks,
                                  traces=structure == "player")


def test_certificate_and_obstruction_never_both_hold():
    # Weak duality (Boyd & Vandenberghe 2004, Convex Optimization, sec. 5.9): a certificate and
    # an obstruction exclude each other; on random matrices the method nearly always finds one.
    rng = np.random.default_rng(5)
    decided = 0
    for _ in range(150):
        M = rng.normal(size=(4, 4))
        J = M - (np.max(np.linalg.eigvals(M).real) + rng.uniform(0.05, 1.0)) * np.eye(4)
        P, _, X = _run(J, (2, 2), "block")
        cert, obst = _certificate_holds(J, P, (2, 2)), _obstruction_holds(J, X, (2, 2))
        assert not (cert and obst)
        decided += cert or obst
    assert decided >= 147


def test_player_weights_and_jit_vmap():
    # vmap over a stack agrees with one call per matrix; "player" weights are constant per block.
    rng = np.random.default_rng(6)
    M = rng.normal(size=(8, 4, 4))
    Js = jnp.asarray(-(M @ np.swapaxes(M, 1, 2)) - 0.2 * np.eye(4))
    batched = jax.jit(jax.vmap(lambda J: lyapunov_lmi(J, (2, 2), "player")))(Js)
    for i in range(8):
        one = lyapunov_lmi(Js[i], (2, 2), "player")
        np.testing.assert_allclose(np.asarray(batched[0][i]), np.asarray(one[0]), atol=1e-10)
        P = np.asarray(one[0])
        np.testing.assert_allclose(P - np.diag(np.diag(P)), 0.0, atol=0)
        assert P[0, 0] == P[1, 1] and P[2, 2] == P[3, 3]


def test_basis_sizes_and_bad_structure():
    assert basis((1, 1, 1), "diagonal").shape == (3, 3, 3)
    assert basis((2, 3), "block").shape == (3 + 6, 5, 5)
    assert basis((2, 3), "player").shape == (2, 5, 5)
    with pytest.raises(ValueError, match="structure must be one of"):
        basis((2,), "full")
