"""Bytes and files: the wire protocol, recordings, the profile's TOML, CSV.

Rules: may use receiver.odometry and receiver.errors; never a socket, a
thread of its own or the page. Every boundary validates here once and
raises one-line errors; the layers above assume valid data.

What the layers above use:
- protocol: ``decode``, ``decode_keeping_raw``, ``decode_message``, ``encode``, ``Sample`` (its ``data``: the
  team's own signals), ``Failure``, ``Reason``, ``PoseMessage``
- profile_toml: ``load_profile``, ``profile_from_table``, ``profile_to_table``, ``write_profile``
- profile_set: ``edited_profile``, ``parse_setting``, ``parse_edit``, ``edits_as_text`` (`--set KEY=VALUE` text)
- profile_writer: ``write_profile_preserving`` (a user's file, only changed values changed),
  ``profile_text`` (a clean commented file), ``write_profile_file``
- starter_profiles: ``starter_profile``, ``starter_text``, ``LAYOUTS`` (``podwatch profile new``)
- recording: ``read_recording``, ``RecordingStream``, ``RecordingData``
- recording_writer: ``RecordingWriter``
- block_decoder: ``worker_pool`` (large files on two cores); csv_writer: ``write``, ``text_cells``
- json_shape: ``MAX_NESTING``; profile_limits: the bounds a profile's numbers are held to
"""
