"""From tracker frames to a run folder: corrections (clock, Nyquist zone, prescaler), the
baseline, and the batch replay of a recording. May import runfolder, sources and tracking."""
