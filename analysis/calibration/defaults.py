"""Default settings of the calibration analysis, in a module with no heavy imports so the
command line can show them in ``--help`` without loading SciPy."""

#: default threshold factor on the noise at the dwell time (see analysis.detection)
DEFAULT_K = 5.0
#: Monte Carlo draws (parametric bootstrap) for the range interval, and the seed that makes them reproducible
DEFAULT_BOOTSTRAP = 4000
DEFAULT_SEED = 0
#: default time discarded at the start and at the end of every stretch (target moves, hands)
DEFAULT_SETTLE_S = 1.0
#: default tolerance of a target placement, +-mm (a hand-placed part against a ruler or jig)
DEFAULT_PLACEMENT_MM = 1.0
