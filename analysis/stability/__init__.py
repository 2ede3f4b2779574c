"""Oscillator stability: the Allan family with gaps, equivalent degrees of freedom and
intervals, drift, warm-up and temperature coefficient. Pure computation (tempco also reads a
temperature CSV); may import only :mod:`coilshift.logger.errors`.

- :mod:`.grid`: frames onto a uniform time grid, NaN for gaps (``UniformSeries``, ``to_uniform``)
- :mod:`.allan`, :mod:`.allan_edf`: the estimators; equivalent degrees of freedom, intervals,
  noise identification
- :mod:`.drift`: least-squares line with AR(1)-aware error (``fit_line_ar1``, ``fit_drift``)
- :mod:`.warmup`: when the drift rate settles (``find_warmup``)
- :mod:`.tempco`: frequency against temperature (``temperature_coefficient``,
  ``read_temperature_csv``)
- :mod:`.noise`: dominant noise per tau; ``noise_at_tau_hz``, the noise figure at a dwell
- :mod:`.analyse`: the whole analysis (``analyse_stability`` -> ``StabilityResult``)
"""
