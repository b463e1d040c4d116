"""``calib quantify`` does not load scipy.stats or scipy.optimize for itself.

t quantiles come from :mod:`calib.fit.distributions` (scipy.special only), so
reading samples back needs neither.  A child process runs the command with an
import hook that notes which calib module first asked for each scipy
subpackage (measured the same way as ``python -X importtime``, but with the
asker named).  No calib module may ask: ``calib.fit.limits`` loads scipy.optimize inside
the ISO 11843-2 root finding only (issue 18, item 3).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from tests.quantify.helpers import write_run_csv, write_samples_csv

ROOT = Path(__file__).resolve().parents[2]

PROBE = r'''
import json, sys, traceback
from importlib.abc import MetaPathFinder
WATCHED = ("scipy.stats", "scipy.optimize")
askers = {}
class Spy(MetaPathFinder):
    def find_spec(self, name, path=None, target=None):
        if name in WATCHED and name not in askers:
            frames = [f.filename for f in traceback.extract_stack()]
            mods = [f for f in frames if "/calib/" in f.replace("\\", "/")]
            askers[name] = mods[-1].replace("\\", "/").split("/calib/", 1)[1] if mods else "?"
        return None
sys.meta_path.insert(0, Spy())
from calib.cli.main import main
try:
    code = main(sys.argv[1:])
except SystemExit as exc:
    code = exc.code
sys.stdout.flush()
sys.stderr.write("\nIMPORTS " + json.dumps({"askers": askers, "code": code}) + "\n")
'''


def _asked(tmp_path: Path, *args: str) -> dict[str, str]:
    probe = tmp_path / "probe.py"
    probe.write_text(PROBE, encoding="utf-8")
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    done = subprocess.run([sys.executable, str(probe), *args], capture_output=True, text=True,
                          env=env, check=False, timeout=120)
    line = done.stderr.rsplit("IMPORTS ", 1)[-1]
    report = json.loads(line)
    assert report["code"] in (0, 1), done.stderr[-2000:]
    return report["askers"]


@pytest.mark.parametrize("samples", [False, True])
def test_quantify_of_a_run_file_asks_for_no_scipy_stats_or_optimize(tmp_path, samples):
    run = write_run_csv(tmp_path / "run.csv")
    args = ["quantify", str(run)] + ([str(write_samples_csv(tmp_path / "s.csv"))]
                                     if samples else []) + ["--json"]
    asked = _asked(tmp_path, *args)
    assert "scipy.stats" not in asked
    # Common practice: a heavy subpackage for one root is loaded where it is used, if at all;
    # the default profile's detection limits (ICH Q2) need no root.
    assert asked == {}, asked


def test_the_probe_sees_an_import(tmp_path):
    # The hook itself: the ISO 11843-2 limits find their non-centrality with scipy.optimize,
    # imported inside calib.fit.limits when they are asked for.
    probe_args = ["-c", "ISO 11843"]
    probe = tmp_path / "probe.py"
    probe.write_text(PROBE.replace("from calib.cli.main import main",
                                   "def main(argv):\n    from calib.fit import limits\n"
                                   "    limits._noncentrality(5, 0.05, 0.05)\n"
                                   "    return 0"), encoding="utf-8")
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    done = subprocess.run([sys.executable, str(probe), *probe_args], capture_output=True,
                          text=True, env=env, check=False, timeout=120)
    asked = json.loads(done.stderr.rsplit("IMPORTS ", 1)[-1])["askers"]
    assert asked.get("scipy.optimize") == "fit/limits.py"
