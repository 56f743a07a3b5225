"""degreescope's engine: accurate polynomial fits, degree sweeps and data intake.

Public surface (everything else is private and may change):

    read_table(source, *, max_bytes=DEFAULT_MAX_BYTES, name=None) -> Table
    read_values(source, *, max_bytes=DEFAULT_MAX_BYTES, name=None) -> Table   # one column allowed

    fit_polynomial(x, y, degree, *, weights=None, through_origin=False) -> PolynomialFit
    sweep_degrees(x, y, *, degrees=range(0, 13), folds=10, holdout=None, ordered=False,
                  repeats=1, seed=0, weights=None) -> DegreeSweep
    sweep_source(source, *, x=None, y=None, degrees=range(0, 13), folds=10, holdout=None,
                 seed=0, engine="numpy", scheduler=None, chunk_rows=1_000_000,
                 progress=None) -> (DegreeSweep, report dict)   # CSV, Parquet, folders, Dask

Errors raised on purpose derive from DegreescopeError:

    DegreescopeError
    ├── IntakeError
    │   └── FileTooLargeError
    ├── ColumnError
    └── FitError

This package never imports the dashboard (``app``), dash or plotly.
"""

from ._errors import ColumnError, DegreescopeError, FileTooLargeError, FitError, IntakeError, RankWarning
from ._polyfit import PolynomialFit, fit_polynomial
from ._stream import fold_labels, holdout_mask, sweep_source
from ._sweep import MAX_DEGREE, MAX_SEED, DegreeSweep, sweep_degrees
from .intake import DEFAULT_MAX_BYTES, MAX_COLUMNS, DropInfo, IntakeReport, Selection, Table, read_table, read_values

__all__ = [
    "DEFAULT_MAX_BYTES",
    "MAX_COLUMNS",
    "MAX_DEGREE",
    "MAX_SEED",
    "ColumnError",
    "DegreeSweep",
    "DegreescopeError",
    "DropInfo",
    "FileTooLargeError",
    "FitError",
    "IntakeError",
    "IntakeReport",
    "PolynomialFit",
    "RankWarning",
    "Selection",
    "Table",
    "fit_polynomial",
    "fold_labels",
    "holdout_mask",
    "read_table",
    "read_values",
    "sweep_degrees",
    "sweep_source",
]
