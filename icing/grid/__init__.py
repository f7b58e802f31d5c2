"""Model grids: lazy, chunked diagnosis with xarray and dask, column summaries, and CF output files."""

from icing.grid.diagnosis import (
    DEFAULT_CHUNK_POINTS,
    N_FREEZING_LEVELS,
    SUMMARY_OUTPUTS,
    chunk_model,
    column_summaries,
    diagnose_grid,
    grid_core,
    grid_main,
    scheduler,
    write_grid,
)

__all__ = ["diagnose_grid", "grid_core", "column_summaries", "chunk_model", "scheduler", "write_grid",
           "grid_main", "N_FREEZING_LEVELS", "DEFAULT_CHUNK_POINTS", "SUMMARY_OUTPUTS"]
