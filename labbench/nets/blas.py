"""Run the engine's small matmuls on one BLAS thread.

The matrices of small networks are far too small for BLAS threads to pay: on a 2-core machine
two OpenBLAS threads made stacked training 1.2-15 x slower than one (measured for widths 32-512,
batches 16-1024, most of all when other processes keep the cores busy). ``one_thread()`` limits
BLAS to one thread for the duration of a ``StackTrainer.run`` through threadpoolctl when it is
installed; if it is not, or if the user set OPENBLAS_NUM_THREADS / OMP_NUM_THREADS /
MKL_NUM_THREADS, it changes nothing.
"""

from __future__ import annotations

import contextlib
import logging
import os

log = logging.getLogger("labbench.nets.blas")

_THREAD_VARS = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")
_controller = None


def one_thread():
    global _controller
    if any(os.environ.get(name) for name in _THREAD_VARS):
        return contextlib.nullcontext()
    if _controller is None:
        try:
            from threadpoolctl import ThreadpoolController
        except ImportError:
            log.debug("threadpoolctl is not installed; BLAS keeps its default thread count")
            _controller = False
        else:
            _controller = ThreadpoolController()
    if _controller is False:
        return contextlib.nullcontext()
    return _controller.limit(limits=1, user_api="blas")
