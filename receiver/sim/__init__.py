"""The simulated robot: motion paths, encoder counts, the robot code's own odometry, the network.

Rules: may use receiver.odometry and receiver.formats (it builds wire
messages); never a socket, a file or a clock read: a seed in, arrays and
messages out. The demo (live/demo.py) streams it; tests and the replay
fixtures record it.

What the layers above use:
- simulate: ``simulate``, ``Run``
- motion_paths: ``PATHS``, ``make_path``
"""
