"""plot_simulation and plot_basins: exact PNG sizes, pictures that are not blank, colours that mark
what the run did, and one-line input errors.

Runs come from a two-firm Cournot game (one game object: compilation is the main cost); records
built by hand, with invented numbers, cover what that game cannot show (a blow-up to non-finite
values, several equilibria, three actions).
"""

from types import SimpleNamespace

import matplotlib.image as mpimg
import numpy as np
import pytest

import equipoise
from equipoise import InputError, Outcome
from equipoise.dynamics import Basins, Simulation, basins, plot_basins, plot_simulation, simulate
from equipoise.dynamics._plot import _words

GAME = equipoise.cournot(a=100.0, b=2.0, costs=[10.0, 10.0])
REACHED = (0xE0, 0x7A, 0x1F)  # the star of the equilibrium a run reached
GREY = (0xB3, 0xAC, 0xA2)  # starts that reached no known equilibrium


@pytest.fixture(scope="module")
def runs():
    return {"best_response": simulate(GAME, rule="best_response", steps=40),
            "flow": simulate(GAME, rule="flow", start=[5.0, 30.0], steps=300)}


@pytest.fixture(scope="module")
def basin():
    return basins(GAME, rule="flow", starts=16, steps=300)


def _pixels(path) -> np.ndarray:
    return np.round(mpimg.imread(path)[..., :3] * 255).astype(int)


def _not_blank(px: np.ndarray) -> None:
    assert len(np.unique(px.reshape(-1, 3), axis=0)) > 50
    assert px.std() > 20.0  # on the 0-255 scale; a white page with a few lines stays below 20


def _share_near(px: np.ndarray, rgb, tol: int = 12) -> float:
    return float(np.mean(np.all(np.abs(px - np.array(rgb)) <= tol, axis=-1)))


def _hand_run() -> Simulation:
    """Three actions leaving the first of two equilibria from 1e-6 away, growing by 3 a step to non-finite."""
    t = np.arange(31.0)
    E = [np.array([4.0, 6.0, 5.0]), np.array([9.0, 1.0, 2.0])]
    path = E[0] + 1e-6 * np.outer(3.0 ** t, [1.0, -0.5, 0.25]) * np.cos(t)[:, None]
    path[-1] = [np.inf, np.nan, 1e15]
    return Simulation(path, t, Outcome.diverged, None, None, E, {"a": "flow", "b": "flow", "c": "flow"},
                      np.array([1.0, 0.01, 1.0]), {"steps": 30, "dt": 0.05, "perturb": 1e-6})


def test_runs_exact_size_and_not_blank(runs, tmp_path):
    for (name, sim), size in zip(runs.items(), [(900, 650), (640, 480)]):
        out = str(tmp_path / f"{name}.png")
        assert plot_simulation(sim, out, game=GAME, size=size) == out
        px = _pixels(out)
        assert px.shape[:2] == (size[1], size[0])
        _not_blank(px)
        assert sim.outcome is Outcome.converged and sim.equilibrium == 0
        assert _share_near(px, REACHED) > 1e-4  # the reached equilibrium is highlighted in the plane


def test_basins_two_actions(basin, tmp_path):
    out = plot_basins(basin, tmp_path / "basins.png", game=GAME, size=(700, 520))
    px = _pixels(out)
    assert px.shape[:2] == (520, 700)
    _not_blank(px)
    assert basin.shares == [1.0]
    assert _share_near(px, GREY, tol=4) < 1e-4  # every start reached the equilibrium: no grey dots


def test_hand_built_blow_up(tmp_path):
    sim = _hand_run()
    px = _pixels(plot_simulation(sim, str(tmp_path / "blowup.png"), size=(800, 600)))
    assert px.shape[:2] == (600, 800)
    _not_blank(px)
    assert _share_near(px, REACHED) == 0.0  # nothing reached: no highlighted equilibrium


def test_hand_built_basins(tmp_path):
    rng = np.random.default_rng(3)
    E2 = [np.array([2.0, 2.0]), np.array([8.0, 7.0])]
    starts = rng.uniform(0.0, 10.0, (40, 2))
    reached = np.where(starts[:, 0] < 4, 0, np.where(starts[:, 0] < 8, 1, -1))
    outcomes = [Outcome.converged if r >= 0 else Outcome.cycling for r in reached]
    counts = {"converged": int(np.sum(reached >= 0)), "cycling": int(np.sum(reached < 0))}
    shares = [float(np.mean(reached == k)) for k in range(2)]
    two = Basins(starts, outcomes, reached, shares, counts, E2, {"a": "adam", "b": "gradient"},
                 np.array([1.0, 2.0]), {"steps": 100, "lr": 0.01})
    px = _pixels(plot_basins(two, str(tmp_path / "two.png")))
    assert px.shape[:2] == (650, 900)
    _not_blank(px)
    assert _share_near(px, GREY, tol=4) > 5e-4  # the starts beyond 8 reached nothing: grey
    three = Basins(np.zeros((10, 3)), [Outcome.converged] * 6 + [Outcome.diverged] * 4,
                   np.array([0] * 4 + [1] * 2 + [-1] * 4), [0.4, 0.2], {"converged": 6, "diverged": 4},
                   [np.zeros(3), np.ones(3)], {"a": "flow", "b": "flow", "c": "flow"}, np.ones(3), {"steps": 10})
    px = _pixels(plot_basins(three, str(tmp_path / "three.png"), size=(600, 400)))
    assert px.shape[:2] == (400, 600)
    _not_blank(px)
    assert _share_near(px, GREY, tol=4) > 5e-3  # the "none" bar


def test_title_words(runs):
    assert _words(_hand_run(), 0) == ("gradient flow, speeds (1, 0.01, 1)", "30 steps, dt = 0.05")
    assert _words(runs["best_response"], 0) == ("simultaneous best responses", "40 steps")  # speeds play no part
    mixed = SimpleNamespace(rule={"a": "adam", "b": "gradient"}, speeds=[1.0, 2.0], settings={"lr": 0.125})
    assert _words(mixed, 7) == ("a: Adam, b: gradient play, speeds (1, 2)", "7 steps, learning rate 0.125")


@pytest.mark.parametrize("size", [(10, 10), (900,), (900.0, 650), "900x650", (9000, 650)])
def test_bad_size(size, tmp_path):
    with pytest.raises(InputError, match="--size"):
        plot_simulation(_hand_run(), tmp_path / "x.png", size=size)


@pytest.mark.parametrize("where", ["picture.txt", "missing/folder/picture.png"])
def test_bad_out(where, tmp_path):
    with pytest.raises(InputError, match="--out") as err:
        plot_simulation(_hand_run(), tmp_path / where)
    assert "\n" not in str(err.value)


def test_bad_inputs(tmp_path):
    with pytest.raises(InputError, match="Simulation"):
        plot_simulation({"path": [[1.0]]}, tmp_path / "x.png")
    with pytest.raises(InputError, match="Basins"):
        plot_basins(_hand_run(), tmp_path / "x.png")
    with pytest.raises(InputError, match="3 actions"):  # a two-action game cannot name three actions
        plot_simulation(_hand_run(), tmp_path / "x.png", game=GAME)
    assert not (tmp_path / "x.png").exists()
