"""Every component id of the dashboard, shared by the layout, the callbacks and the tests.

The first block are stable DOM ids that acceptance tests look up; do not rename them.
"""

# -- stable ids (acceptance tests find these) ---------------------------------
UPLOAD = "upload"
X_COLUMN = "x-column"
Y_COLUMN = "y-column"
DEGREE = "degree"
HOLDOUT = "holdout"
FIT_CHART = "fit-chart"
ERROR_CHART = "error-chart"
OVERFIT_ALERT = "overfit-alert"
RECOMMENDED_DEGREE = "recommended-degree"
COEFFICIENTS = "coefficients"

# -- data intake --------------------------------------------------------------
URL = "url"
DATASET = "dataset"  # dcc.Store: {"id", "name", "columns", ...}; no data
UPLOAD_NOTICE = "upload-notice"
UPLOAD_SIZE_WARNING = "upload-size-warning"  # written only by assets/degreescope.js
INTAKE_REPORT = "intake-report"
WEIGHTS_COLUMN = "weights-column"
GROUP_COLUMN = "group-column"

# -- validation split -----------------------------------------------------------
SPLIT_MODE = "split-mode"
FOLDS = "folds"
SEED = "seed"
NEW_SPLIT = "new-split"
SPLIT_NOTE = "split-note"

# -- degree and bands -----------------------------------------------------------
BANDS = "bands"
DEGREE_READOUT = "degree-readout"

# -- verdict and numbers ----------------------------------------------------------
FIT_NOTICE = "fit-notice"
MEASURE_NOTE = "measure-note"
RECOMMENDATION_TEXT = "recommendation-text"
SWEEP_NOTES = "sweep-notes"
STATS = "stats"
EQUATION = "equation"
EQUATION_COPY = "equation-copy"
MODEL_NOTE = "model-note"
RESIDUAL_CHART = "residual-chart"

# -- predict ----------------------------------------------------------------------
PREDICT_INPUT = "predict-input"
PREDICT_TABLE = "predict-table"

# -- exports ------------------------------------------------------------------------
FIT_PNG = "fit-png"
FIT_SVG = "fit-svg"
ERROR_PNG = "error-png"
ERROR_SVG = "error-svg"
IMAGE_DONE = "image-done"
REPORT_BUTTON = "report-button"
MODEL_BUTTON = "model-button"
CSV_BUTTON = "csv-button"
DOWNLOAD = "download"
EXPORT_NOTICE = "export-notice"

# -- chart trace order (figures.py builds them in this order; Patch indexes them) -----
# the fit chart's points layer (FIT_POINTS): training, then test (markers or densities)
POINTS_TRACE_TRAIN = 0
POINTS_TRACE_TEST = 1
# the fit chart's curve layer (FIT_CHART)
FIT_TRACE_PRED_LO = 0
FIT_TRACE_PRED_HI = 1
FIT_TRACE_CONF_LO = 2
FIT_TRACE_CONF_HI = 3
FIT_TRACE_CURVE = 4
ERR_TRACE_TRAIN = 0
ERR_TRACE_TEST = 1
ERR_TRACE_STEADY = 2
ERR_TRACE_CURRENT = 3
ERR_TRACE_RECOMMENDED = 4

# -- stores -----------------------------------------------------------------------------
SPLIT_KEY = "split-key"  # the settings the charts on screen were drawn for
HOLDOUT_BOX = "holdout-box"
FOLDS_BOX = "folds-box"
UPLOAD_BOX = "upload-box"  # carries data-limit for assets/degreescope.js
DEGREE_SETTLED = "degree-settled"  # dcc.Store: the degree once it has rested (assets/degreescope-layers.js)

# -- data panel: sheets, pasted tables, shared views ------------------------------------------
SHEET = "sheet"  # the workbook's sheet picker
SHEET_BOX = "sheet-box"
PASTE_TEXT = "paste-text"  # cells pasted from a spreadsheet, or a text table
PASTE_BUTTON = "paste-button"
VIEW_NOTICE = "view-notice"  # "load FILE to restore this view", columns of a shared view not in the file
COLUMN_NOTE = "column-note"  # which columns were picked and why
VIEW_PENDING = "view-pending"  # dcc.Store: the shared view waiting for its file ({"search", "file"})
VIEW_COLUMNS = "view-columns"  # dcc.Store: [dataset, x, y, weights, group] the degree was last set for
INTERVAL_LEVEL = "interval-level"  # dcc.Store: the interval level in per cent the URL keeps (a level control writes it)
URL_WANTED = "url-wanted"  # dcc.Store: the address the page should show (put in place by replaceState)
URL_APPLIED = "url-applied"  # dcc.Store: output of that clientside step (never set)

# -- model card, predictions and downloads (app/panels/model.py, predict.py, downloads.py) --
MODEL_HANDOVER = "model-handover"  # the card's one line: the model is fitted on every usable row
PREDICT_NOTE = "predict-note"


# -- evidence panel (app/panels/evidence.py) ---------------------------------------------
EVIDENCE_RULE = "evidence-rule"
EVIDENCE_ROWS = "evidence-rows"
EVIDENCE_SENTENCE = "evidence-sentence"
EVIDENCE_TABLE = "evidence-table"
EVIDENCE_NOTES = "evidence-notes"
EVIDENCE_NOTICE = "evidence-notice"
MANDEL = "mandel"
STABILITY_CHART = "stability-chart"
STABILITY_TEXT = "stability-text"
INFLUENCE_TABLE = "influence-table"
LEAVE_OUT_LINE = "leave-out-line"
LEAVE_OUT_REASON = "leave-out-reason"
LEAVE_OUT_BUTTON = "leave-out-button"
LEAVE_OUT_NOTICE = "leave-out-notice"
LEFT_OUT_LIST = "left-out-list"
PUT_BACK = "put-back"  # pattern-matching type: {"type": PUT_BACK, "line": n}, one button per row left out
EXCLUSIONS = "exclusions"  # dcc.Store: {"dataset": id, "rows": [{"line", "reason"}]}; carried by the URL ("out")
RING_FIT = "ring-fit"  # dcc.Store: the ring trace last appended to the fit chart
RING_RESIDUAL = "ring-residual"  # dcc.Store: the ring trace last appended to the residual chart
RING_META = "evidence-ring"  # the meta tag of the ring traces
STABILITY_STATUS = "stability-status"  # "computing…" while the redraws run
STABILITY_GO = "stability-go"  # dcc.Store: a count written (clientside) once the settings have rested


# -- calibration: the read-back panel and the standards panel (app/panels/readback.py, standards.py) --------
READBACK_INPUT = "readback-input"
READBACK_COUNT = "readback-count"  # k, readings averaged per unknown
READBACK_LEVEL = "readback-level"  # interval level in per cent
READBACK_RESULT = "readback-result"
READBACK_NOTE = "readback-note"
READBACK_MARKS = "readback-marks"  # dcc.Store: shapes for the fit chart (merged by a clientside Patch)
WEIGHTING = "weighting"  # named weighting of the calibration fit
TOLERANCE = "tolerance"
LOWEST_TOLERANCE = "lowest-tolerance"
STANDARDS_SUMMARY = "standards-summary"
STANDARDS_TABLE = "standards-table"
WEIGHTING_TABLE = "weighting-table"
STANDARDS_NOTE = "standards-note"
STANDARDS_MARKS = "standards-marks"  # dcc.Store: the marker trace of failing standards

# -- chart keys: every mark of a chart in plain words (panels/charts.py) ----------------
FIT_KEY = "fit-key"
ERROR_KEY = "error-key"

# -- the fit chart's layers (app/layers.py) ------------------------------------------
FIT_POINTS = "fit-points"  # the points layer under FIT_CHART
FIT_STACK = "fit-stack"  # the box that stacks the two layers
DEGREE_FRAMES = "degree-frames"  # dcc.Store: every degree's curve and bands, sent once per split
