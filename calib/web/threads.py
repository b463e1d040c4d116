"""One BLAS thread per request in ``calib serve``.

A web server already runs requests side by side.  When numpy's BLAS also
starts one thread per core for every fit, the threads of two requests (or of a
request and any other busy process) fight over the same cores and a verdict
that takes a third of a second alone can take seconds.  So the server holds
BLAS to one thread: through the usual environment variables when numpy is not
loaded yet (the ``calib serve`` command sets them first thing), otherwise with
threadpoolctl when it is installed.
"""

from __future__ import annotations

import os
import sys
from collections.abc import MutableMapping

__all__ = ["limit_blas_threads"]

#: The variables OpenBLAS, MKL, BLIS and OpenMP read when they load.
_BLAS_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS",
                  "BLIS_NUM_THREADS", "VECLIB_MAXIMUM_THREADS", "NUMEXPR_NUM_THREADS")


def limit_blas_threads(environ: MutableMapping[str, str] | None = None) -> str:
    """Hold BLAS to one thread; say how (for the server's start-up line).

    A variable the user set is kept: it is their choice.  With ``environ`` given
    only that mapping is filled (this process's BLAS is left alone).

    Examples
    --------
    >>> env = {"OMP_NUM_THREADS": "2"}
    >>> _ = limit_blas_threads(env)
    >>> env["OPENBLAS_NUM_THREADS"], env["OMP_NUM_THREADS"]
    ('1', '2')
    """
    env = os.environ if environ is None else environ
    for name in _BLAS_VARIABLES:
        env.setdefault(name, "1")
    if "numpy" not in sys.modules or environ is not None:
        return "BLAS threads: 1 per request (set before numpy loaded)"
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        return ("BLAS threads: numpy was loaded before calib serve could limit them "
                "(install threadpoolctl, or set OPENBLAS_NUM_THREADS=1)")
    threadpool_limits(limits=1, user_api="blas")
    return "BLAS threads: 1 per request (threadpoolctl)"
