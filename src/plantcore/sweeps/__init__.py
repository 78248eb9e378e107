"""Envelope sweeps: one analysis per operating point, run serially, on a local process pool
or on a Dask cluster, and sweep specification files with their expression language.

Imports the core, structure, reduction, analysis and files layers.
"""

from plantcore.sweeps.points import grid, random_points
from plantcore.sweeps.spec import SweepSpec, load_sweep_spec
from plantcore.sweeps.sweep import SweepResult, sweep

__all__ = ["SweepResult", "SweepSpec", "grid", "load_sweep_spec", "random_points", "sweep"]
