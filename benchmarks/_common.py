"""Shared pieces of the benchmark scripts: the plain-numpy logit references, timing, Markdown output.

Nothing here imports equipoise or JAX, so a reference timed with these functions pays for no
JAX start-up. Every script is run by ``python benchmarks/run_all.py`` (all of them, results into
``benchmarks/RESULTS.md``) or on its own.
"""

from __future__ import annotations

import inspect
import time

import numpy as np

# ---------------------------------------------------------------- logit Bertrand in plain numpy
#
# Products j = 1..J, mean utilities delta_j, one price coefficient alpha > 0, marginal costs c_j,
# ownership matrix Omega (Omega_jk = 1 when j and k have the same owner). Shares
#     s_j = exp(delta_j - alpha p_j) / (1 + sum_k exp(delta_k - alpha p_k)),
# and the first-order condition of product j's owner, divided by M s_j > 0 (the form equipoise's
# logit family hands its solver; same roots and signs), with markups m = p - c:
#     g_j(p) = 1 - alpha m_j + alpha sum_k Omega_jk m_k s_k .


def ownership(owner):
    """``Omega[j, k] = 1.0`` when products ``j`` and ``k`` have the same owner."""
    owner = list(owner)
    return np.equal.outer(owner, owner).astype(float)


def contiguous_owner(firms, products):
    """Owner names for ``firms`` x ``products``, each firm's products next to each other, so the
    game's stacked action order (firm by firm) is the product order."""
    return [f"firm{f + 1:02d}" for f in range(firms) for _ in range(products)]


def shares(p, delta, alpha):
    """Logit shares, computed without overflow (the outside good has utility 0)."""
    v = delta - alpha * p
    top = max(float(v.max()), 0.0)
    e = np.exp(v - top)
    return e / (np.exp(-top) + e.sum())


def foc(p, c, delta, alpha, Omega):
    """The share-divided first-order conditions ``g(p)`` above."""
    s = shares(p, delta, alpha)
    m = p - c
    return 1.0 - alpha * m + alpha * (Omega @ (m * s))


def foc_and_jacobian(p, c, delta, alpha, Omega):
    """``g(p)`` and its analytic Jacobian.

    With ``ds_k/dp_l = -alpha s_k (delta_kl - s_l)``:
    ``dg_j/dp_l = -alpha delta_jl + alpha Omega_jl s_l (1 - alpha m_l) + alpha^2 (Omega (m s))_j s_l``.
    """
    s = shares(p, delta, alpha)
    m = p - c
    w = Omega @ (m * s)
    g = 1.0 - alpha * m + alpha * w
    J = alpha * Omega * (s * (1.0 - alpha * m))[None, :] + alpha**2 * np.outer(w, s)
    J[np.diag_indices_from(J)] -= alpha
    return g, J


def hybr(c, x0, delta, alpha, Omega, jac):
    """``scipy.optimize.root(method="hybr")`` on ``g``; ``jac=True``: the analytic Jacobian (MINPACK
    hybrj), ``jac=False``: MINPACK's forward differences (hybrd). Returns (prices, success)."""
    from scipy.optimize import root

    if jac:
        r = root(foc_and_jacobian, x0, args=(c, delta, alpha, Omega), jac=True, method="hybr",
                 options={"xtol": 1e-12})
    else:
        r = root(foc, x0, args=(c, delta, alpha, Omega), method="hybr", options={"xtol": 1e-12})
    return r.x, bool(r.success)


def markup_fixed_point(c, delta, alpha, Omega, m0=None, tol=1e-12, max_steps=10_000):
    """The markup fixed point of Morrow & Skerlos (2011), "Fixed-point approaches to computing
    Bertrand-Nash equilibrium prices under mixed-logit demand", Operations Research 59(2), for plain
    logit with one price coefficient:

        m <- 1/alpha + Omega (s(c + m) * m),

    iterated until the first-order residual ``max |g|`` (``g`` above, at ``p = c + m``) is at most
    ``tol``. Returns (prices, success, iterations)."""
    m = np.full_like(c, 1.0 / alpha) if m0 is None else np.array(m0, dtype=float)
    inv = 1.0 / alpha
    for k in range(max_steps):
        s = shares(c + m, delta, alpha)
        new = inv + Omega @ (s * m)
        # g = 1 - alpha m + alpha Omega (m s) = alpha (new - m): the residual costs nothing extra.
        if alpha * np.max(np.abs(new - m)) <= tol:
            return c + m, True, k
        m = new
    return c + m, False, max_steps


def invented_market(firms, products, seed=0, alpha=1.2):
    """An invented logit market: ``firms`` x ``products`` products (each firm's products
    contiguous), costs uniform on [1, 3], mean utilities ``alpha c + u - log(n) + 1`` with ``u``
    uniform on [-1, 1] (quality follows cost, and the outside good keeps a share near one half
    whatever the number of products ``n``). With ``alpha = 1.2`` equilibrium markups are about
    0.85 to 1.1, margins about 30 %. Returns a dict of ``delta``, ``alpha``, ``c``, ``owner``,
    ``Omega``."""
    rng = np.random.default_rng(seed)
    n = firms * products
    c = rng.uniform(1.0, 3.0, n)
    delta = alpha * c + rng.uniform(-1.0, 1.0, n) - np.log(n) + 1.0
    owner = contiguous_owner(firms, products)
    return {"delta": delta, "alpha": alpha, "c": c, "owner": owner, "Omega": ownership(owner)}


# ---------------------------------------------------------------- what equipoise offers today
def equipoise_sides():
    """Which solver sides exist in the installed equipoise: ``{"dense", "krylov", "fixed_point"}``
    (the Newton-Krylov path and the fixed point were added after the dense Newton solver)."""
    import equipoise

    have = set()
    if hasattr(equipoise, "newton_solve"):
        have.add("dense")
        if "linear" in inspect.signature(equipoise.newton_solve).parameters:
            have.add("krylov")
    if hasattr(equipoise, "fixed_point_solve"):
        have.add("fixed_point")
    return have


SIDE_LABELS = {"dense": 'equipoise newton_solve(linear="dense")',
               "krylov": 'equipoise newton_solve(linear="krylov")',
               "fixed_point": "equipoise fixed_point_solve"}


def jitted_solver(game, side):
    """``jax.jit`` of one solve ``(x0, c) -> RootResult`` of ``game`` with costs ``c``, by ``side``."""
    import jax

    import equipoise

    if side == "fixed_point":
        return jax.jit(lambda x, c: equipoise.fixed_point_solve(game, x, game.theta({"c": c})))
    if side == "krylov":
        return jax.jit(lambda x, c: equipoise.newton_solve(game, x, game.theta({"c": c}), linear="krylov"))
    return jax.jit(lambda x, c: equipoise.newton_solve(game, x, game.theta({"c": c})))


# ---------------------------------------------------------------- timing
def median_time(f, repeats=None, budget=2.0, min_repeats=3, max_repeats=50):
    """Median wall time of ``f()`` over ``repeats`` calls, or, when ``repeats`` is None, as many
    calls as fit in about ``budget`` seconds (at least ``min_repeats``, at most ``max_repeats``)."""
    times = []
    start = time.perf_counter()
    while True:
        t = time.perf_counter()
        f()
        times.append(time.perf_counter() - t)
        n = len(times)
        if repeats is not None:
            if n >= repeats:
                break
        elif n >= max_repeats or (n >= min_repeats and time.perf_counter() - start >= budget):
            break
    return float(np.median(times)), len(times)


def fmt_time(seconds):
    """A duration with a unit that keeps three significant figures."""
    if not np.isfinite(seconds):
        return "n/a"
    if seconds >= 1.0:
        return f"{seconds:.2f} s"
    if seconds >= 1e-3:
        return f"{seconds * 1e3:.3g} ms"
    return f"{seconds * 1e6:.3g} us"


def goal(met, text):
    """``text`` with a met / **missed** verdict."""
    return f"{text}: {'met' if met else '**missed**'}"


def machine_note():
    """The 1-minute load average now and the BLAS thread setting, for the method lines: other
    processes on this 2-core machine slow multi-threaded OpenBLAS calls (jaxlib's CPU LU goes
    through the same library) by up to two orders of magnitude."""
    import os

    try:
        with open("/proc/loadavg") as fh:
            load = fh.read().split()[0]
    except OSError:
        load = "unknown"
    threads = os.environ.get("OPENBLAS_NUM_THREADS", "default")
    return f"load average {load} at the start, OpenBLAS threads {threads}"


# ---------------------------------------------------------------- Markdown output
BEGIN = "<!-- bench: {name} -->"
END = "<!-- /bench -->"


def markdown_section(name, title, lines, header, rows, notes=()):
    """A Markdown section between markers that ``run_all.py`` collects: a title, a few lines of
    method, one table and notes. Printed at the end of every script."""
    out = [BEGIN.format(name=name), f"### {title}", ""]
    out += list(lines)
    out += ["", "| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    out += ["| " + " | ".join(str(v) for v in row) + " |" for row in rows]
    if notes:
        out += [""] + list(notes)
    out.append(END)
    return "\n".join(out)
