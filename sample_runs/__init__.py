"""Invented demo runs of the fictional Fernbrook Water Laboratory (installed as calib.sample_runs)."""
