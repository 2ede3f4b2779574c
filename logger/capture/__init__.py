"""Live capture: the real-time engine (queue, worker, timeline, input health), the session (markers,
re-zero, live snapshot), the calibration guide, the terminal view and raw-audio saving. May import
runfolder, sources, tracking and pipeline; never the analysis side."""
