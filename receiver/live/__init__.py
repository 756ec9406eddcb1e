"""The live receiver: sessions, the hub, ring buffers, replay, the demo, ``serve`` and the transports.

Rules: uses receiver.odometry and receiver.formats (receiver.sim only in
demo.py); owns every socket and thread of the receiver. Nothing here is
imported by the offline commands, so they start without the network stack.

What the layers above use:
- serve: ``serve``, ``ServeConfig``, ``LiveReceiver``, ``summary_lines``, ``parse_host_port``
- hub: ``Hub``; session: ``LinkState``, ``RobotSnapshot``
- raw_history: ``RawHistory`` (``columns``; ``signals``: a robot's own signals by name over a window); replay: ``replay_into_hub``, ``replay_to``, ``feed_hub``, ``recorded_samples``
- demo: ``SimulatedRobot``, ``demo_profile``
- transports: udp, websocket, mqtt listeners and ``send.open_sender``
"""
