"""The pose engine: robot description, kinematics, conventions, integration, recompute.

Rules: no I/O, no clocks, no threads; imports only numpy and receiver.errors.
A live stream and a recording go through the same functions here.

What the layers above use:
- robot: ``Profile``, ``Wheel``, ``Reported``, ``METRES_PER_UNIT``, ``inches``, ``rolls_along``
- columns: ``Columns`` (``signals``: the team's own, by name), ``columns_from_samples``, ``concat_columns``
- recompute: ``Tracker`` (``feed``, ``feed_one``), ``Result``
- kinematics: ``Kinematics``; integrate: ``integrate``, ``wrap_angle``, ``METHODS``
- conventions: ``reported_to_rep103``, ``rep103_to_reported``, ``imu_heading_change``
- counts: ``SampleKind``, ``classify``, ``count_change``, ``ACCEPTED``, ``ANCHORS``
- faults: ``Faults``, ``parse_faults``, ``robot_code_profile`` (the model of convention mistakes)
- profile_edit: ``Edit``, ``apply_edits``, ``PROFILE_SETTINGS``, ``WHEEL_SETTINGS``, ``profile_values``,
  ``differing_values``, ``edits_between`` (the `--set` keys and their checks)
"""
