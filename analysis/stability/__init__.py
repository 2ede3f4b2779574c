"""Oscillator stability: the Allan family with gaps, equivalent degrees of freedom and
intervals, drift, warm-up and temperature coefficient. Pure computation; may import only
:mod:`coilshift.logger.errors`."""
