"""Live capture: the real-time engine, the calibration guide, the terminal view and raw-audio
saving. May import runfolder, sources, tracking and pipeline; never the analysis side."""
