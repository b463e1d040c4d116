"""Time to verdict of a 40-analyte upload through ``calib serve``, against the library call.

What a reviewer waits for: from sending the run file on the page to having the
run's page with every verdict, measured against ``calib.service.check`` on the
same file in this process.  Both are timed while another process keeps a core
busy (a bounded busy loop), as on a shared lab PC; that is when BLAS threads
fighting over the cores used to make the page many times slower than the
library (see ``calib.web.threads``).

The server is the real command, ``python -m calib serve``, on a free loopback
port; it and the busy loop are stopped at the end however the bench ends.
Each side runs ``--repeats`` times after one warm-up, and the medians and their
ratio are printed (target: the page within 2× the library call).

Run from the repository root::

    python bench/web_verdict.py
    python bench/web_verdict.py --repeats 3 --no-load
"""

from __future__ import annotations

import argparse
import re
import socket
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
RUN = ROOT / "sample_runs" / "multiresidue_screen_40_2026-12-10.xlsx"
#: The busy loop ends by itself after this many seconds even if the bench is killed.
LOAD_SECONDS = 600


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def start_server(port: int) -> subprocess.Popen[bytes]:
    server = subprocess.Popen([sys.executable, "-m", "calib", "serve", "--port", str(port)],
                              cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.STDOUT)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        with socket.socket() as s:
            if s.connect_ex(("127.0.0.1", port)) == 0:
                return server
        if server.poll() is not None:
            raise RuntimeError("calib serve stopped: " + server.stdout.read().decode())
        time.sleep(0.1)
    server.kill()
    raise RuntimeError("calib serve did not start within 60 s")


def page_verdict(client: object, base: str, data: bytes) -> tuple[float, str]:
    """Seconds from sending the upload to the run page in hand, and the run verdict shown."""
    from calib.web.security import CSRF_FIELD

    home = client.get(base + "/")
    value = re.search(rf'name="{CSRF_FIELD}" value="([^"]+)"', home.text).group(1)
    start = time.perf_counter()
    r = client.post(base + "/check", data={CSRF_FIELD: value, "profile": "default"},
                    files={"run": (RUN.name, data)}, follow_redirects=True)
    took = time.perf_counter() - start
    r.raise_for_status()
    verdict = re.search(r'Run verdict: <span class="verdict v-([a-z-]+)"', r.text)
    if verdict is None:
        raise RuntimeError("the run page shows no verdict")
    return took, verdict.group(1)


_CHILD = """
import sys, time, statistics
from calib import service
service.check(sys.argv[1])  # warm-up
times = []
for _ in range(int(sys.argv[2])):
    start = time.perf_counter()
    verdict = service.check(sys.argv[1]).assessment.verdict.value
    times.append(time.perf_counter() - start)
print(verdict, *times)
"""


def library_verdicts(repeats: int, *, one_thread: bool) -> tuple[list[float], str]:
    """The library call's times in a fresh interpreter (BLAS at one thread, or its default)."""
    import os

    env = dict(os.environ, PYTHONPATH=str(ROOT))
    if one_thread:
        env.update(OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1", MKL_NUM_THREADS="1")
    else:
        for name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
            env.pop(name, None)
    done = subprocess.run([sys.executable, "-c", _CHILD, str(RUN), str(repeats)], cwd=ROOT,
                          env=env, capture_output=True, text=True, timeout=900, check=True)
    verdict, *times = done.stdout.split()
    return [float(t) for t in times], verdict


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--repeats", type=int, default=5, help="timed runs per side (5)")
    parser.add_argument("--no-load", action="store_true", help="without the busy loop")
    args = parser.parse_args()
    if args.repeats < 1:
        parser.error("--repeats must be at least 1")
    import httpx

    data = RUN.read_bytes()
    load = None
    if not args.no_load:
        load = subprocess.Popen([sys.executable, "-c",
                                 (f"import time\nend = time.time() + {LOAD_SECONDS}\n"
                                 "while time.time() < end: pass")])
    port = free_port()
    server = start_server(port)
    try:
        base = f"http://127.0.0.1:{port}"
        with httpx.Client(timeout=120) as client:
            page_verdict(client, base, data)  # warm-up: imports, first fit
            page = [page_verdict(client, base, data) for _ in range(args.repeats)]
        lib_one, lib_verdict = library_verdicts(args.repeats, one_thread=True)
        lib_default, _ = library_verdicts(args.repeats, one_thread=False)
    finally:
        server.terminate()
        server.wait(timeout=20)
        if load is not None:
            load.terminate()
            load.wait(timeout=20)
    if {v for _, v in page} != {lib_verdict}:
        print(f"verdicts differ: page {page[0][1]}, library {lib_verdict}", file=sys.stderr)
        return 1
    web_s = statistics.median(t for t, _ in page)
    lib_s = statistics.median(lib_one)
    where = "with a busy loop on another core" if load is not None else "without load"
    print(f"40-analyte run {RUN.name}, {args.repeats} runs each, {where}:")
    print(f"  library call, BLAS at 1 thread       median {lib_s:7.3f} s")
    print(f"  library call, BLAS at its default    median {statistics.median(lib_default):7.3f} s")
    print(f"  page: upload to verdict page         median {web_s:7.3f} s")
    ratio = web_s / lib_s
    print(f"  ratio page / library (1 thread)      {ratio:7.2f}  (target ≤ 2)")
    return 0 if ratio <= 2 else 2


if __name__ == "__main__":
    sys.exit(main())
