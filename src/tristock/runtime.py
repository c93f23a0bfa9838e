"""Process-wide settings for the numeric work, made once at ``import tristock``.

**The C heap's padding (glibc only).** The analysis evaluates the model on batches of 10^4 to
10^5 points, so every numpy temporary is a few hundred kB. With its default settings glibc's
malloc gives such memory back to the system when it is freed and faults fresh pages in for the
next batch: the weights of a 20,000-point spline look-up (``circuits.gridspline.grid_axis``)
took 390 us instead of 65 us. With ``M_TOP_PAD`` at ``HEAP_PAD`` the heap keeps that much free
space at its top. Measured (``python tests/benchmark_recheck.py``): ``design()`` on the demo
15-20 % faster; ``tristock design --example`` 3 MB more peak RSS. A process whose environment
sets ``MALLOC_TOP_PAD_`` keeps its own setting.

**One BLAS thread.** The only linear algebra is the worst-case search's eigen-decompositions of
Hessians of 12 x 12 to 19 x 19 (one row per spread variable; ``analysis.boxnewton``), too small
for threads to help; OpenBLAS's worker threads (numpy's and scipy's, one per extra core) spin
between calls and burned about 0.16 s of CPU per ``tristock design --example`` on a 2-core
machine, and slowed the main thread when the cores were shared. ``OPENBLAS_NUM_THREADS`` is set
to 1 unless the environment sets it; it takes effect only when numpy is first imported after
tristock (as in the CLI and the server), so a program that imports numpy first sets it itself.

Neither setting changes a value: the answers are the same to the bit.
"""

from __future__ import annotations

import ctypes
import os
import sys

#: Bytes the heap keeps free at its top (glibc ``M_TOP_PAD``).
HEAP_PAD = 64 << 20
M_TOP_PAD = -2  # glibc's mallopt parameter number (malloc.h)
BLAS_THREADS = "OPENBLAS_NUM_THREADS"


def keep_heap_pad() -> bool:
    """Set ``M_TOP_PAD`` to ``HEAP_PAD``; True when it was set."""
    if not sys.platform.startswith("linux") or "MALLOC_TOP_PAD_" in os.environ:
        return False
    try:
        mallopt = ctypes.CDLL(None).mallopt
    except (OSError, AttributeError):  # not glibc (musl has no mallopt)
        return False
    return bool(mallopt(M_TOP_PAD, HEAP_PAD))


def one_blas_thread() -> bool:
    """Ask OpenBLAS for one thread; True when set here (not set before, numpy not loaded)."""
    if BLAS_THREADS in os.environ or "numpy" in sys.modules:
        return False
    os.environ[BLAS_THREADS] = "1"
    return True
