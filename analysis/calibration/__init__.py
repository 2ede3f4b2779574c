"""Calibration analysis: per-step shifts with honest errors and their covariance, the family-wise
test of whether a target is seen, curve fits with their chi-squared verdicts, the noise behind the
threshold, the detection range read from the points with its Monte Carlo interval, ferrous calls
with their evidence, run comparison, the analysed run (:mod:`.run`) and its summary as dictionaries.
May import :mod:`coilshift.logger.runfolder`, analysis.stability and analysis.models; never
writes files."""
