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
