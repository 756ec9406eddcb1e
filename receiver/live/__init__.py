"""The live receiver: sessions, the hub, ring buffers, replay, the demo, ``serve`` and the transports.

Rules: uses receiver.odometry and receiver.formats (receiver.sim only in
demo.py); owns every socket and thread of the receiver. Nothing here but
gate.py (plain Python, for ``--max-rate``'s default in the parser) is
imported by the offline commands, so they start without the network stack.

What the layers above use:
- serve: ``serve`` (returns ``Finished``), ``ServeConfig``, ``LiveReceiver``, ``summary_lines``, ``parse_host_port``
- hub: ``Hub`` (its ``health``: health.``Health``); session: ``LinkState``, ``RobotSnapshot``
- gate: ``parse_networks``, ``DEFAULT_MAX_RATE``; supervise: ``reason``
- raw_history: ``RawHistory`` (``columns``; ``signals``: a robot's own signals by name over a window); replay: ``replay_into_hub``, ``replay_to``, ``feed_hub``, ``recorded_samples``
- demo: ``SimulatedRobot``, ``demo_profile``
- transports: udp, websocket, mqtt listeners and ``send.open_sender``
"""
