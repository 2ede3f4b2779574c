"""The frequency tracker, pure NumPy/SciPy with no I/O: settings, the per-frame stages (coarse, harmonics,
fine, quality), sub-bin estimators, the IEEE 1057 sine fit, and ``tracker`` streaming frames through them.
May import only :mod:`coilshift.logger.runfolder` (flags, frames) and :mod:`coilshift.logger.errors`."""
