"""The ranges a run's settings must lie in, for every face (the ``tristock`` command, the API).

A face refuses a value outside its range with a message naming the option or field; the
library functions check the same bounds again where they take the value. The HTTP service may
set lower ceilings of its own (a shared server's load), never higher ones.

Each range is inclusive: ``(least, most)``.
"""

from __future__ import annotations

from typing import Final

#: Designs returned by one search (``--top``, ``ranking.top``).
TOP: Final = (1, 100)
#: Monte Carlo samples of one analysis. At the ceiling the yield's standard error at 99 %
#: yield is sqrt(0.99·0.01/1e5) = 0.03 %, finer than any spec asks; more only costs memory.
SAMPLES: Final = (1, 100_000)
#: Monte Carlo seed: numpy's generators take any non-negative integer; 32 bits is what a JSON
#: client can carry exactly everywhere.
SEED: Final = (0, 2**32 - 1)
#: Settled periods measured by one time-domain simulation.
PERIODS: Final = (1, 200)
#: Samples per waveform kept from one simulation.
MAX_POINTS: Final = (16, 20_000)
#: Boards of a planned build (``--boards``, ``build.boards``).
BOARDS: Final = (1, 10_000_000)
#: Pieces on hand of one part.
STOCK: Final = (0, 1_000_000_000)
#: Stock codes named unavailable in one re-optimisation (``--without``).
WITHOUT_MAX: Final = 1000

#: Search time limit (s): finite and above zero; an hour at most, so every search ends.
TIME_LIMIT_MAX_S: Final = 3600.0
#: The search time limit when none is given (s); ``tristock.designs.fixed.DEFAULT_TIME_LIMIT_S``.
DEFAULT_TIME_LIMIT_S: Final = 5.0

#: TCP port of ``tristock serve`` (0: any free port) and its worker processes.
PORT: Final = (0, 65535)
WORKERS: Final = (1, 64)

#: Widest value range of one generated table (``catalog generate``), in decades: 1 mΩ..1 TΩ or
#: 1 pF..1 kF; a wider range is a typo, and would take minutes to write.
GENERATE_MAX_DECADES: Final = 15

#: Largest spec or DESIGN file read (bytes); a real one is a few hundred bytes.
SPEC_FILE_MAX_BYTES: Final = 1 << 20
