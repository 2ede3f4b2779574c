"""The frequency tracker: pure NumPy/SciPy, no I/O. Settings, coarse search, fine step,
sub-bin estimators and the IEEE 1057 sine fit. May import only :mod:`coilshift.logger.runfolder`
(flags, frames) and :mod:`coilshift.logger.errors`."""
