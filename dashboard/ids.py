"""Every component id of the page, in one place.

Owns the names the layout, the callbacks and the browser tests share; a
string id never appears anywhere else.
"""

# Controls
VIEW_ID = "view-id"  # the tab's own view (tabs.Station.tab); set when its page is built
ROBOT = "robot-select"
WINDOW = "window-select"
FOLLOW = "follow-button"
TICK = "tick"
CURSOR = "cursor"
REQUEST = "request"
REPLAY_REQUEST = "replay-request"
STATUS = "status-line"
PAGE_STATE = "page-state"  # the "page paused" badge, set by the pause button itself

# Replay
REPLAY_BAR = "replay-bar"
PLAY = "replay-play"
PAUSE = "replay-pause"
SPEED = "replay-speed"
SCRUB = "replay-scrub"
REPLAY_POSITION = "replay-position"

# Recording opener (dashboard/recording_opener.py)
RECORDINGS_FOLDER = "recordings-folder"
RECORDING_CHOICE = "recording-choice"
RECORDINGS_TICK = "recordings-tick"
OPEN = "recording-open"
OPEN_SHOWN = "recording-open-shown"
BACK_TO_LIVE = "back-to-live"
MESSAGE = "message-line"

# Views
TRACK = "track-map"
POSES = "pose-traces"
ERRORS = "disagreement-traces"
LOOP = "loop-traces"
LOOP_HISTOGRAM = "loop-histogram"
SIGNALS = "robot-signals"
SIGNAL_PICK = "signal-pick"

# Readouts (each a single number with its unit, so a person or a test can quote it)
POSITION_NOW = "position-error-now"
POSITION_WORST = "position-error-worst"
POSITION_GROWTH = "position-error-per-metre"
HEADING_NOW = "heading-error-now"
HEADING_WORST = "heading-error-worst"
HEADING_GROWTH = "heading-error-per-turn"
GROWTH_STRETCH = "growth-stretch"  # over what the growth figures are computed, and their minimums
LOOP_RATE = "loop-rate"
LOOP_MEAN = "loop-mean"
LOOP_P95 = "loop-p95"
LOOP_MAX = "loop-max"
LOOP_LONG = "loop-long"
JITTER = "arrival-jitter"
LINK_TABLE = "link-health"

# Diagnosis and guided check (dashboard/diagnosis_panel.py)
DIAGNOSE_TICK = "diagnose-tick"
DIAGNOSE_SECONDS = "diagnose-seconds"
DIAGNOSE_RUN = "diagnose-run"
DIAGNOSE_STATUS = "diagnose-status"
DIAGNOSE_RESULT = "diagnose-result"
DIAGNOSE_WATCH = "diagnose-watch"
DIAGNOSE_ASK = "diagnose-ask"
DIAGNOSE_ANSWER = "diagnose-answer"
DIAGNOSE_REQUEST = "diagnose-request"
GUIDED_START = "guided-start"
GUIDED_FINISH = "guided-finish"
GUIDED_RUN = "guided-run"
GUIDED_STEPS = "guided-steps"
GUIDED_TICK = "guided-tick"
GUIDED_REQUEST = "guided-request"
GUIDED_CURSOR = "guided-cursor"

# Profile editor (dashboard/editor_panel.py)
EDITOR_OPEN = "editor-open"
EDITOR_BODY = "editor-body"
EDITOR = "editor-state"  # the tab's edits: the page's own store, never the server's
EDITOR_FORM = "editor-form"
EDITOR_FIELD = "editor-field"  # pattern-matching type: {"type": EDITOR_FIELD, "key": "wheel.0.x"}
EDITOR_FORM_FOR = "editor-form-for"
EDITOR_METHOD = "editor-method"
EDITOR_UNDO = "editor-undo"
EDITOR_RESET = "editor-reset"
EDITOR_DOWNLOAD = "editor-download"
EDITOR_FILE = "editor-file"
EDITOR_MESSAGE = "editor-message"
EDITOR_OPTIONS = "editor-options"
EDITOR_NUMBERS = "editor-numbers"
EDITOR_WHAT = "editor-what"
EDITOR_TRACK = "editor-track"
EDITOR_ERRORS = "editor-disagreement"
EDITOR_TICK = "editor-tick"
EDITOR_CURSOR = "editor-cursor"
DIAGNOSE_SUGGESTION = "diagnose-suggestion"
DIAGNOSE_TRY = "diagnose-try"

# Compare runs (dashboard/compare_panel.py)
COMPARE_CHOICE = "compare-choice"
COMPARE_RUN = "compare-run"
COMPARE_TICK = "compare-tick"
COMPARE_STATUS = "compare-status"
COMPARE_TABLE = "compare-table"
COMPARE_CURVES = "compare-curves"
COMPARE_GRAPHS = "compare-graphs"
COMPARE_SHOWN = "compare-shown"

# What the loop rate costs (dashboard/loop_cost_panel.py)
LOOP_COST_RUN = "loop-cost-run"
LOOP_COST_STATUS = "loop-cost-status"
LOOP_COST_OVER_TIME = "loop-cost-over-time"
LOOP_COST_BY_PERIOD = "loop-cost-by-period"
LOOP_COST_GRAPHS = "loop-cost-graphs"
