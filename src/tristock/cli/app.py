"""``main``: parse, run the command, and turn every outcome into one documented exit code.

No traceback reaches the user: known errors are one line (or, for catalog errors, one line per
problem); anything else goes to a crash log (``guard.crash_report``) and exits 1.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from tristock.cli import exits
from tristock.cli.exits import UsageError, WorkFailed
from tristock.cli.guard import InterruptWatch, crash_report
from tristock.cli.output import complain
from tristock.cli.parser import build_parser

#: Exceptions that name a path the user gave wrongly (exit 2); other OSErrors are failed work.
_WRONG_PATH = (FileNotFoundError, IsADirectoryError, NotADirectoryError)


def _run(args: argparse.Namespace) -> int:
    module = importlib.import_module(f"tristock.cli.{args.handler}")
    return int(module.run(args))


def _caused_by_os(err: BaseException) -> bool:
    """True when ``err`` was raised while handling an OSError (a failed read or write)."""
    seen = err.__cause__ or err.__context__
    while seen is not None:
        if isinstance(seen, OSError):
            return True
        seen = seen.__cause__ or seen.__context__
    return False


def _os_error(err: OSError) -> int:
    where = f"{err.filename}: " if err.filename else ""
    complain(f"tristock: {where}{err.strerror or err}")
    return exits.BAD_INPUT if isinstance(err, _WRONG_PATH) else exits.FAILED


def known_failure(err: Exception) -> int | None:
    """Report an expected failure in one line (catalog errors: one line per problem) and
    return its exit code; None for anything else (a crash)."""
    if isinstance(err, UsageError):
        complain(str(err))
        return exits.BAD_INPUT
    # the library's errors, imported here so that ``--help`` never loads the library
    from tristock.circuits.checks import DoesNotOscillate
    from tristock.simulate import SimulationError
    from tristock.spec.loading import SpecError
    from tristock.stock.catalog import CatalogError, StockError

    if isinstance(err, SpecError):
        complain("tristock: " + "; ".join(err.lines))
        return exits.BAD_INPUT
    if isinstance(err, CatalogError):
        for issue in err.errors:
            complain(str(issue))
        return exits.FAILED
    if isinstance(err, StockError):
        complain(f"tristock: {err}")
        return exits.FAILED if _caused_by_os(err) else exits.BAD_INPUT
    if isinstance(err, DoesNotOscillate | SimulationError | WorkFailed):
        complain(str(err) if str(err).startswith("tristock") else f"tristock: {err}")
        return exits.FAILED
    if isinstance(err, OSError):
        return _os_error(err)
    if isinstance(err, MemoryError):
        complain("tristock: out of memory; ask for fewer samples, points or designs")
        return exits.FAILED
    return None


def _parse_and_run(argv: list[str], watch: InterruptWatch) -> int:
    try:
        args = build_parser().parse_args(argv)
    except SystemExit as done:  # --help and --version print, then ask to exit
        return done.code if isinstance(done.code, int) else exits.OK
    if args.handler == "serve":  # the server handles Ctrl-C and SIGTERM itself, gracefully
        return _run(args)
    with watch:
        return _run(args)


def main(argv: list[str] | None = None) -> int:
    """The ``tristock`` command; returns the exit code (see ``tristock.cli.exits``)."""
    arguments = list(sys.argv[1:] if argv is None else argv)
    watch = InterruptWatch()
    try:
        try:
            return _parse_and_run(arguments, watch)
        except KeyboardInterrupt:
            watch.report()
            return exits.INTERRUPTED
        except Exception as err:
            try:
                code = known_failure(err)
            except Exception:  # even reporting it failed: treat it as unforeseen
                code = None
            if code is None:  # the last resort: a crash log, never a traceback
                complain(crash_report(err, arguments))
                return exits.FAILED
            return code
    except KeyboardInterrupt:  # a second Ctrl-C while the first was being reported
        return exits.INTERRUPTED
