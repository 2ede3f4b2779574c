"""From tracker frames to a run folder: corrections (clock, Nyquist zone, prescaler), the baseline,
the post-processing stage and run.json builder shared by batch and live runs, and the batch replay
of a recording. May import runfolder, sources and tracking."""
