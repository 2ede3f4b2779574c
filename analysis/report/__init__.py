"""Outputs of the analysis: every plot and the files written from a result. The only place that
imports matplotlib (through :mod:`.figures`: Agg backend, PNG bytes, atomic files); may import the
rest of the analysis side and the run-folder writers.

- :mod:`.figures`: figure set-up and saving shared by every plot
- :mod:`.plots_calibration`, :mod:`.plots_stability`, :mod:`.plots_models`: the plots
- :mod:`.calibration_text`: the words and numbers of the calibration results (fits, ranges, verdicts)
- :mod:`.calibration_outputs`: calibration tables, ``result.json``, plots and the HTML report
- :mod:`.stability_text`: the stability report as ``coilshift stability`` prints it
- :mod:`.stability_outputs`: ``sigma_tau.png``, ``drift.png``, ``stability.csv``, ``stability.json``
"""
