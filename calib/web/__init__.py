"""A local web page for the bench: check, issue, sign, archive and quantify in a browser.

Every page calls the same library as the command line (:mod:`calib.workflow`,
:mod:`calib.checks`, :mod:`calib.record`, :mod:`calib.archive`,
:mod:`calib.quantify`) and only renders what it returns; the charts are the
PDF's drawings, rendered as SVG.  Start it with ``calib serve``.
"""

from __future__ import annotations

from calib.web.app import create_app

__all__ = ["create_app"]
