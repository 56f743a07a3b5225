"""degreescope's engine: accurate polynomial fits, degree sweeps and data intake.

Public surface (everything else is private and may change):

    read_table(source, *, max_bytes=DEFAULT_MAX_BYTES, name=None) -> Table

    fit_polynomial(x, y, degree, *, weights=None, through_origin=False) -> PolynomialFit
    sweep_degrees(x, y, *, degrees=range(0, 13), folds=10, holdout=None, ordered=False,
                  repeats=1, seed=0, weights=None) -> DegreeSweep

Errors raised on purpose derive from DegreescopeError:

    DegreescopeError
    ├── IntakeError
    │   └── FileTooLargeError
    ├── ColumnError
    └── FitError

This package never imports the dashboard (``app``), dash or plotly.
"""

from ._errors import ColumnError, DegreescopeError, FileTooLargeError, FitError, IntakeError, RankWarning
from ._intake import DEFAULT_MAX_BYTES, DropInfo, IntakeReport, Selection, Table, read_table
from ._polyfit import PolynomialFit, fit_polynomial
from ._sweep import DegreeSweep, sweep_degrees

__all__ = [
    "DEFAULT_MAX_BYTES",
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
    "read_table",
    "sweep_degrees",
]
