"""Every component id of the page, in one place.

Owns the names the layout, the callbacks and the browser tests share; a
string id never appears anywhere else.
"""

# Controls
ROBOT = "robot-select"
WINDOW = "window-select"
FOLLOW = "follow-button"
TICK = "tick"
CURSOR = "cursor"
REQUEST = "request"
REPLAY_REQUEST = "replay-request"
STATUS = "status-line"

# Replay
REPLAY_BAR = "replay-bar"
PLAY = "replay-play"
PAUSE = "replay-pause"
SPEED = "replay-speed"
SCRUB = "replay-scrub"
REPLAY_POSITION = "replay-position"
RECORDING_PATH = "recording-path"
OPEN = "recording-open"
BACK_TO_LIVE = "back-to-live"
MESSAGE = "message-line"

# Views
TRACK = "track-map"
POSES = "pose-traces"
ERRORS = "disagreement-traces"
LOOP = "loop-traces"
LOOP_HISTOGRAM = "loop-histogram"

# Readouts (each a single number with its unit, so a person or a test can quote it)
POSITION_NOW = "position-error-now"
POSITION_WORST = "position-error-worst"
POSITION_GROWTH = "position-error-per-metre"
HEADING_NOW = "heading-error-now"
HEADING_WORST = "heading-error-worst"
HEADING_GROWTH = "heading-error-per-turn"
LOOP_RATE = "loop-rate"
LOOP_MEAN = "loop-mean"
LOOP_P95 = "loop-p95"
LOOP_MAX = "loop-max"
LOOP_LONG = "loop-long"
JITTER = "arrival-jitter"
LINK_TABLE = "link-health"
