"""degreescope's engine: accurate polynomial fits, degree sweeps and data intake.

Public surface (everything else is private and may change):

    read_table(source, *, max_bytes=DEFAULT_MAX_BYTES, name=None, sheet=None, fast_path=True) -> Table
                                                      # CSV/text, .xlsx/.xlsm/.xls/.ods, bytes or a path
    read_values(source, *, max_bytes=DEFAULT_MAX_BYTES, name=None, sheet=None) -> Table   # one column allowed
    Table, Selection, DropInfo, IntakeReport          # what intake returns (Table.select -> Selection)
    DEFAULT_MAX_BYTES, MAX_COLUMNS                    # intake limits

    fit_polynomial(x, y, degree, *, weights=None, weighting=None, through_origin=False,
                   x_name=None, y_name=None, x_unit=None, y_unit=None) -> PolynomialFit
    WEIGHTINGS                                        # named weighting rules: none, 1/x, 1/x2, 1/y, 1/y2
    weights_for(rule, x, y, *, rows=None) -> weights (inverse variances) or None
    weight_at(rule, x0, y_hat0) -> the weight of a new reading at x0
    t_quantile(level, dof) -> float                   # Student t multiplier of a two-sided interval

    read_back(fit, y0, *, readings=1, level=0.95, weighting=None) -> ReadBack   # x0 from a reading, with
                                                      # the calibration interval and u(x0)
    monotonic_ranges(fit) -> CurveShape               # where the curve rises or falls
    back_calculate(fit, x, y, *, tolerance=15.0, lowest_tolerance=20.0, lines=None) -> BackCalculation
    compare_weightings(x, y, degree, *, rules=..., through_origin=False) -> WeightingComparison
    ReadBack, ReadBackRow, CurveShape, BackCalculation, BackCalculatedStandard, BackCalculationSummary,
    WeightingComparison, WeightingComparisonRow, CALIBRATION_CAUTION

    degree_evidence(x, y, degrees=range(0, 21), *, weights=None, replicate_tolerance=0.0) -> DegreeEvidence
                                                      # lack of fit, added-term F, AIC/BIC per degree
    evidence_sentence(evidence, recommended_degree) -> str
    mandel_test(x, y, *, weights=None) -> MandelResult   # line against quadratic (ISO 8466-1)
    influence(x, y, degree_or_fit, *, weights=None, lines=None) -> Influence
    verdict_stability(x, y, *, draws=200, seed=0, weights=None, groups=None, degrees=None, folds=None,
                      repeats="auto", replicates="auto", replicate_tolerance=0.0)
                                                      -> VerdictStability   # share of redraws per degree
    replicate_levels(x, tolerance=0.0)                # x levels, replicates pooled
    DegreeEvidence, MandelResult, Influence, VerdictStability

    sweep_degrees(x, y, *, degrees=range(0, 13), folds=10, holdout=None, ordered=False,
                  repeats=1, seed=0, weights=None) -> DegreeSweep
    verdict_sweep(x, y, *, weights=None, groups=None, degrees=None, seed=0,
                  replicates="auto", replicate_tolerance=0.0) -> DegreeSweep   # the one verdict rule
    verdict_rule_text(n, *, grouped=False, levels=None, degrees=None, seed=0, replicated=None) -> str
    VERDICT_FOLDS, VERDICT_REPEATS, VERDICT_REPEAT_LIMIT   # the verdict's policy
    MAX_DEGREE, MAX_SEED                              # limits of every sweep
    sweep_source(source, *, x=None, y=None, degrees=range(0, 13), folds=10, holdout=None,
                 seed=0, engine="numpy", scheduler=None, chunk_rows=1_000_000,
                 progress=None) -> (DegreeSweep, report dict)   # CSV, Parquet, folders, Dask
    fold_labels(...), holdout_mask(...)               # the streaming sweep's row assignment

Errors raised on purpose derive from DegreescopeError:

    DegreescopeError
    ├── IntakeError
    │   └── FileTooLargeError(message, *, size=None, limit=None)
    ├── ColumnError
    └── FitError

    RankWarning                                       # kept for callers that filter it; a rank-deficient
                                                      # degree now raises FitError instead

This package never imports the dashboard (``app``), dash or plotly.
"""

from ._calibrate import (
    CALIBRATION_CAUTION,
    BackCalculatedStandard,
    BackCalculation,
    BackCalculationSummary,
    CurveShape,
    ReadBack,
    ReadBackRow,
    WeightingComparison,
    WeightingComparisonRow,
    back_calculate,
    compare_weightings,
    monotonic_ranges,
    read_back,
)
from ._errors import ColumnError, DegreescopeError, FileTooLargeError, FitError, IntakeError, RankWarning
from ._evidence import (
    DegreeEvidence,
    Influence,
    MandelResult,
    VerdictStability,
    degree_evidence,
    evidence_sentence,
    influence,
    mandel_test,
    replicate_levels,
    verdict_stability,
)
from ._linalg import t_quantile
from ._polyfit import PolynomialFit, fit_polynomial
from ._stream import fold_labels, holdout_mask, sweep_source
from ._sweep import DegreeSweep, sweep_degrees
from ._validate import MAX_DEGREE, MAX_SEED
from ._verdict import VERDICT_FOLDS, VERDICT_REPEAT_LIMIT, VERDICT_REPEATS, verdict_rule_text, verdict_sweep
from ._weighting import WEIGHTINGS, weight_at, weights_for
from .intake import DEFAULT_MAX_BYTES, MAX_COLUMNS, DropInfo, IntakeReport, Selection, Table, read_table, read_values

__all__ = [
    "DegreeEvidence",
    "Influence",
    "MandelResult",
    "VerdictStability",
    "degree_evidence",
    "evidence_sentence",
    "influence",
    "mandel_test",
    "replicate_levels",
    "verdict_stability",
    "CALIBRATION_CAUTION",
    "BackCalculatedStandard",
    "BackCalculation",
    "BackCalculationSummary",
    "CurveShape",
    "ReadBack",
    "ReadBackRow",
    "WeightingComparison",
    "WeightingComparisonRow",
    "back_calculate",
    "compare_weightings",
    "monotonic_ranges",
    "read_back",
    "DEFAULT_MAX_BYTES",
    "MAX_COLUMNS",
    "MAX_DEGREE",
    "MAX_SEED",
    "VERDICT_FOLDS",
    "VERDICT_REPEATS",
    "VERDICT_REPEAT_LIMIT",
    "WEIGHTINGS",
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
    "t_quantile",
    "verdict_rule_text",
    "verdict_sweep",
    "weight_at",
    "weights_for",
]
