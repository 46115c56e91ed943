"""Learning and adjustment dynamics: simulate runs, classify how they end, map basins."""

from ._plot import plot_basins, plot_simulation
from ._simulate import Basins, Simulation, basins, classify_path, simulate

__all__ = ["Basins", "Simulation", "basins", "classify_path", "plot_basins", "plot_simulation", "simulate"]
