"""``tristock serve``: the HTTP API on loopback (see ``tristock.serve``)."""

from __future__ import annotations

import argparse

from tristock.cli import exits
from tristock.cli.exits import UsageError


def run(args: argparse.Namespace) -> int:
    from tristock.serve import serve

    try:
        serve(args.host, args.port, args.catalog, args.workers, args.allow_open_writes)
    except ValueError as err:
        raise UsageError(f"tristock serve: {err}") from None
    return exits.OK
