"""tristock: choose stock-room parts for an op-amp triangle/square oscillator.

The packages, lowest layer first (DEVELOPERS.md draws them): ``stock`` (part tables, units,
E series, safe stock writes), ``spec`` and ``examples`` (the engineer's targets, the bundled
specs and demo stock room), ``circuits`` (one package per topology: physics, checks, netlists,
spread boxes, search forms), ``analysis`` and ``simulate`` (worst case, yield, sensitivities;
time-domain runs), ``search`` (the exact engines), ``designs`` (fixed, trimmed, tuned,
re-optimised), ``export``, ``report`` and ``registry`` (files, text, released designs), and
``cli``, ``serve`` and the HTTP API on top. ``runtime`` makes two process-wide settings at import
(the C heap's padding, one BLAS thread; faster, no value changes).
"""

from tristock.runtime import keep_heap_pad, one_blas_thread

__version__ = "0.1.0"

keep_heap_pad()
one_blas_thread()
