"""calib serve holds BLAS to one thread (see calib.web.threads for why).

Checked in fresh interpreters, where numpy has not been loaded yet, with
threadpoolctl's report of the BLAS library numpy actually loaded.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
pytest.importorskip("threadpoolctl")

REPORT = ("from threadpoolctl import threadpool_info; "
          "print(max(i['num_threads'] for i in threadpool_info() if i['user_api'] == 'blas'))")


def python(code: str, **env: str) -> list[str]:
    clean = {k: v for k, v in os.environ.items()
             if k not in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")}
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          cwd=ROOT, env={**clean, "PYTHONPATH": str(ROOT), **env}, timeout=120,
                          check=False)
    assert done.returncode == 0, done.stderr
    return done.stdout.split("\n")


def test_threads_are_limited_before_numpy_loads():
    out = python("from calib.web.threads import limit_blas_threads; "
                 "print(limit_blas_threads()); import numpy; " + REPORT)
    assert out[0] == "BLAS threads: 1 per request (set before numpy loaded)"
    assert out[1] == "1"


def test_threads_are_limited_with_threadpoolctl_when_numpy_is_already_loaded():
    out = python("import numpy; from calib.web.threads import limit_blas_threads; "
                 "print(limit_blas_threads()); " + REPORT)
    assert out[0] == "BLAS threads: 1 per request (threadpoolctl)"
    assert out[1] == "1"


def test_a_users_own_setting_is_kept():
    env = {"OMP_NUM_THREADS": "2"}
    from calib.web.threads import limit_blas_threads

    limit_blas_threads(env)
    assert env["OMP_NUM_THREADS"] == "2" and env["OPENBLAS_NUM_THREADS"] == "1"


def test_the_serve_command_limits_threads_before_it_loads_the_web_page():
    # calib serve with uvicorn stubbed: what matters is the order (numpy loads after the cap).
    out = python("import sys, uvicorn; uvicorn.run = lambda *a, **k: None; "
                 "from calib.cli.main import main; code = main(['serve', '--port', '8765']); "
                 "import numpy; " + REPORT)
    assert "calib: BLAS threads: 1 per request (set before numpy loaded)" in out
    assert out[-2] == "1"
