"""Detector simulator: synthesises recordings with a known truth (for the demo and the tests), the
truth model of the coil and its targets (:mod:`.fields`, :mod:`.inductance`, :mod:`.sphere`,
:mod:`.materials`, :mod:`.benchcoil`, used by :mod:`.response`; independent of the analysis side), and calibration
sessions simulated at the log level (:mod:`.logsession`)."""
