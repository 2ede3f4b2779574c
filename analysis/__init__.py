"""Analysis side of coilshift: reads shift logs; calibration, range, class, stability, models, reports."""
