"""Oscillator stability: warm-up and drift by a settling fit under the oscillator's own noise, the
Allan family with gaps, equivalent degrees of freedom and intervals, noise labels, and the
temperature coefficient. Pure computation (tempco also reads a temperature CSV); may import
only :mod:`coilshift.logger.errors`.

- :mod:`.grid`: frames onto a uniform time grid, NaN for gaps (``UniformSeries``, ``to_uniform``)
- :mod:`.allan`, :mod:`.allan_edf`: the estimators; equivalent degrees of freedom, intervals
- :mod:`.slope_id`: the noise type per tau from the local slope (``label_noise``)
- :mod:`.blocks`, :mod:`.gls`: block means with their exact white + random-walk FM covariance,
  banded whitening (``Blocks``, ``Whitener``)
- :mod:`.noise_model`: white FM + random-walk FM levels by REML (``NoiseModel``, ``fit_noise_reml``)
- :mod:`.settling_lsq`, :mod:`.settling`: exponential settling plus drift, model choice by BIC
  (``fit_settling`` -> ``SettlingFit``)
- :mod:`.warmup`: the settled start (``settled_start`` -> ``Warmup``)
- :mod:`.drift`: the settled drift or why it is not determined (``settled_drift`` -> ``Drift``)
- :mod:`.span`: a calibration log's baselines, the part the deviations use (``choose_span``)
- :mod:`.tempco`: frequency against temperature (``temperature_coefficient``,
  ``read_temperature_csv``)
- :mod:`.noise`: ``noise_at_tau_hz``, the noise figure at a dwell
- :mod:`.result`, :mod:`.analyse`: the whole analysis (``analyse_stability`` -> ``StabilityResult``)
"""
