"""The ``calib`` command line (the only layer that parses arguments, prints and exits)."""
