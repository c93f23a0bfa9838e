"""tristock: choose stock-room parts for an op-amp triangle/square oscillator.

The packages, lowest layer first (DEVELOPERS.md draws them): ``stock`` (part tables, units,
E series, safe stock writes), ``spec`` and ``examples`` (the engineer's targets, the bundled
specs and demo stock room), ``circuits`` (one package per topology: physics, checks, netlists,
spread boxes, search forms), ``analysis`` and ``simulate`` (worst case, yield, sensitivities;
time-domain runs), ``search`` (the exact engines), ``designs`` (fixed, trimmed, tuned,
re-optimised), ``export``, ``report`` and ``registry`` (files, text, released designs), and
``cli``, ``serve`` and the HTTP API on top. ``allocator`` sets the C heap's padding once per
process (large numpy batches run 15-20 % faster).
"""

from tristock.allocator import keep_heap_pad

__version__ = "0.1.0"

keep_heap_pad()
