"""Training-data campaigns (being split into space / sampling / store / execution / export)."""

from ._old import *  # noqa: F403
from ._old import (  # noqa: F401
    ROTATION_GRID_POINTS,
    SpaceError,
    Store,
    design_dict,
    evaluate_formula,
    export,
    export_rows,
    load_space,
    rotation_grid,
    run_campaign,
    run_sample,
    sample_space,
    status_summary,
)
