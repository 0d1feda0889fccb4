"""Training-data campaigns: a sampled design space, parallel runs, a resumable SQLite store.

A campaign varies some values of a base design (the space file), runs every sample and keeps
each outcome, so that the table it exports can train and test a surrogate model:

* :mod:`.space`: the space file, its schema and its checks against the base design;
* :mod:`.formulas`: the small arithmetic language of derived values;
* :mod:`.sampling`: unit-cube points (Sobol', Latin hypercube, grid) and physical values;
* :mod:`.store`: the typed run record and the SQLite store (resume, status);
* :mod:`.execution`: one run per sample, local process pool or Dask, :func:`run_campaign`;
* :mod:`.export`: the tidy table (CSV or Parquet);
* :mod:`.paths`: dotted design paths and :class:`SpaceError`.
"""

from .execution import ROTATION_GRID_POINTS, rotation_grid, run_campaign, run_sample
from .export import export, export_rows
from .formulas import Formula, evaluate_formula, parse_formula
from .paths import SpaceError
from .sampling import sample_space
from .space import Space, SpaceSpec, design_dict, load_space, space_json_schema
from .store import FINISHED, RunRecord, RunStatus, Store, StoreError, status_summary

__all__ = ["ROTATION_GRID_POINTS", "FINISHED", "Formula", "RunRecord", "RunStatus",
           "Space", "SpaceError", "SpaceSpec", "Store", "StoreError", "design_dict",
           "evaluate_formula",
           "export", "export_rows", "load_space", "parse_formula", "rotation_grid",
           "run_campaign", "run_sample", "sample_space", "space_json_schema",
           "status_summary"]
