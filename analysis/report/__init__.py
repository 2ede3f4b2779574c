"""Outputs of the analysis: every plot (Agg backend) and the HTML reports. The only place that
imports matplotlib; may import the rest of the analysis side and the run-folder writers."""
