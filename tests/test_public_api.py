"""The public surface of equipoise: exactly these names, nothing private."""

import importlib.metadata
import pkgutil
import types

import jax

import equipoise
import equipoise.families

# The agreed public API. A change here is an API change: update on purpose.
PUBLIC = {
    "allocation_efficiency",
    "minmax_quadratic",
    "network_game",
    "proportional_allocation",
    "public_good",
    "tullock",
    "Basins",
    "Outcome",
    "Simulation",
    "basins",
    "simulate",
    "Axis",
    "PointStatus",
    "SweepResult",
    "SweepSpec",
    "sweep",
    "Branch",
    "Counterfactual",
    "BranchPoint",
    "Equilibrium",
    "Event",
    "Game",
    "InputError",
    "Nash",
    "RootResult",
    "Solution",
    "Status",
    "Verification",
    "counterfactual",
    "cournot",
    "fixed_point_solve",
    "homotopy",
    "linear_bertrand",
    "load_game",
    "logit_bertrand",
    "logit_products",
    "merged_ownership",
    "newton_solve",
    "ownership_matrix",
    "solve",
    "trace",
    "trace_between",
    "verify",
}

# Public submodules (no leading underscore) may appear as attributes once imported.
SUBMODULES = {m.name for m in pkgutil.iter_modules(equipoise.__path__) if not m.name.startswith("_")}


def test_all_is_the_agreed_surface():
    assert len(equipoise.__all__) == len(set(equipoise.__all__)), "duplicates in __all__"
    assert set(equipoise.__all__) == PUBLIC


def test_every_public_name_imports():
    namespace = {}
    exec("from equipoise import *", namespace)  # noqa: S102 - the star import is what is tested
    namespace.pop("__builtins__")
    assert set(namespace) == PUBLIC
    for name in PUBLIC:
        assert getattr(equipoise, name) is namespace[name]


def test_public_submodules_exist():
    assert {"families", "cli", "dynamics", "stability", "sweeps"} <= SUBMODULES


def test_nothing_private_leaks():
    assert not [n for n in equipoise.__all__ if n.startswith("_")]
    public_attrs = {n for n in vars(equipoise) if not n.startswith("_")}
    extra = public_attrs - PUBLIC
    # Besides the API only public submodules may show up (never a helper
    # function or constant from a private module).
    assert extra <= SUBMODULES, f"unexpected public names: {sorted(extra - SUBMODULES)}"
    for name in extra:
        assert isinstance(getattr(equipoise, name), types.ModuleType)


def test_public_objects_are_documented():
    for name in PUBLIC:
        doc = getattr(equipoise, name).__doc__
        assert doc and doc.strip(), f"{name} has no docstring"


def test_families_reexport():
    assert set(equipoise.families.__all__) == {
        "allocation_efficiency", "cournot", "linear_bertrand", "logit_bertrand", "logit_products", "merged_ownership",
        "minmax_quadratic", "network_game", "ownership_matrix", "proportional_allocation", "public_good", "tullock"}
    for name in equipoise.families.__all__:
        assert getattr(equipoise, name) is getattr(equipoise.families, name)


def test_sweeps_reexport():
    import equipoise.sweeps

    assert set(equipoise.sweeps.__all__) == {"Axis", "Store", "SweepResult", "SweepSpec", "load_spec", "plot_store",
                                             "sweep"}
    for name in ("Axis", "SweepResult", "SweepSpec", "sweep"):
        assert getattr(equipoise, name) is getattr(equipoise.sweeps, name)


def test_version_matches_distribution():
    assert equipoise.__version__ == importlib.metadata.version("equipoise")


def test_float64_on_after_import():
    assert jax.config.jax_enable_x64 is True
    assert jax.numpy.asarray(1.0).dtype == jax.numpy.float64
