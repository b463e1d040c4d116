"""Report layout and wording (installed as calib.report_templates)."""
