"""The checks: diagnosis of convention mistakes, refinement, the guided check, calibration,
and the tuning workbench's numbers (growth, a run's row for comparing, what the loop costs).

Rules: uses receiver.odometry (and receiver.errors) only; never
receiver.formats, receiver.sim, receiver.live, the command line or the
page, so that the checks run on columns from a recording or from a live
session alike. Pure numpy and scipy (threadpoolctl keeps diagnosis's fits on
one BLAS thread).

What the layers above use:
- sample_clip: ``clip_from_columns``, ``last_seconds``, ``SampleClip``
- diagnose: ``diagnose``, ``diagnose_recent``, ``Diagnosis``, ``equivalence_classes``
- guided_check: ``guided_check``, ``GuidedResult``, ``INSTRUCTIONS``, ``MOVES``
- calibrate: ``spin_calibration``, ``push_calibration``, ``Calibration``
- mistakes: ``profile_changes``, ``verdict``; wording: the shared words of results
- growth: ``growth``, ``Growth``, ``stand_in``, ``disagreement_by_distance``, ``step_motion``, ``MIN_TRAVEL_M``,
  ``MIN_TURNS``
- compare: ``run_row``, ``row_from_result``, ``RunRow``, ``profile_differences``
- loop_cost: ``loop_cost``, ``LoopCost``, ``loop_cost_bins``
"""
