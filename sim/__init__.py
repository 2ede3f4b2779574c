"""Detector simulator: synthesises recordings with a known truth (for the demo and the tests), the
truth model of the coil's field and finite targets (:mod:`.fields`, independent of the analysis
side), and calibration sessions simulated at the log level (:mod:`.logsession`)."""
