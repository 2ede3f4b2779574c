"""Events found in a recording without markers (hand passes, sweeps, a target left a while): the
batch run of the logger's streaming detector (:mod:`coilshift.logger.events`) with the noise and
the variogram measured on the whole recording. May import coilshift.logger; never writes files."""
