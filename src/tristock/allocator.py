"""The C allocator's heap padding, set once per process (glibc only).

The analysis evaluates the model on batches of 10^4 to 10^5 points, so every numpy temporary is
a few hundred kB. With its default settings glibc's malloc gives such memory back to the
system when it is freed and faults fresh pages in for the next batch: the weights of a
20,000-point spline look-up (``circuits.gridspline.grid_axis``) took 390 us instead of 65 us.
With ``M_TOP_PAD`` at ``HEAP_PAD`` the heap keeps that much free space at its top.
Measured (``python tests/benchmark_recheck.py``): ``design()`` on the demo 15-20 % faster;
``tristock design --example`` 3 MB more peak RSS. The answers do not change (where memory
comes from changes no value).

A process whose environment sets ``MALLOC_TOP_PAD_`` keeps its own setting; elsewhere than on
glibc nothing is done.
"""

from __future__ import annotations

import ctypes
import os
import sys

#: Bytes the heap keeps free at its top (glibc ``M_TOP_PAD``).
HEAP_PAD = 64 << 20
M_TOP_PAD = -2  # glibc's mallopt parameter number (malloc.h)


def keep_heap_pad() -> bool:
    """Set ``M_TOP_PAD`` to ``HEAP_PAD``; True when it was set."""
    if not sys.platform.startswith("linux") or "MALLOC_TOP_PAD_" in os.environ:
        return False
    try:
        mallopt = ctypes.CDLL(None).mallopt
    except (OSError, AttributeError):  # not glibc (musl has no mallopt)
        return False
    return bool(mallopt(M_TOP_PAD, HEAP_PAD))
