"""The ``tristock`` command: design, analyse, simulate, re-optimise and keep the part tables.

One module per command group (``design``, ``analyse``, ``simulate``, ``reoptimise``,
``catalog``, ``serve``), each with a ``run(args)``; ``parser`` holds the options and their
ranges, ``app`` the entry point ``main`` and the exit codes' mapping (``exits``), ``guard`` the
Ctrl-C watcher and the crash log, ``output`` the writing of results.

Exit codes: 0 answers found; 1 the work failed (catalog errors, a loop that cannot oscillate,
a search cut short before it found anything, a refused write, an internal error with a crash
log); 2 bad input (one line naming the option or field); 3 no design meets the spec; 130
interrupted. Never a traceback.
"""

from __future__ import annotations

from tristock.cli.app import main
from tristock.cli.parser import build_parser
from tristock.examples import EXAMPLES, demo_catalog_dir, example_spec_path

__all__ = ["EXAMPLES", "build_parser", "demo_catalog_dir", "example_spec_path", "main"]
