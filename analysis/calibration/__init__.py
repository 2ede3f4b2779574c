"""Calibration analysis: per-step shifts with honest errors, curve fits, detection range,
ferrous calls, run comparison, the analysed run (:mod:`.run`) and its summary as dictionaries.
May import :mod:`coilshift.logger.runfolder`, analysis.stability and analysis.models; never
writes files."""
