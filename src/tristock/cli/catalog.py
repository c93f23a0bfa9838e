"""``tristock catalog check | generate | set-stock``: the part tables.

``check`` exits 0 when every table loads, 1 listing every problem (``file:line: column:
message``). ``generate`` exits 2 for values the catalog would refuse. ``set-stock`` exits 2 for
an unknown id, 1 when the table is broken or the disk refuses the write.
"""

from __future__ import annotations

import argparse
import math
import sys

from tristock.cli import exits
from tristock.cli.exits import UsageError
from tristock.cli.output import emit, write_quietly
from tristock.spec import limits
from tristock.stock.catalog import (
    Catalog,
    CatalogError,
    adjust_stock,
    load_catalog,
    parse_number,
    set_stock,
)
from tristock.stock.parts import DELAY_MEANING
from tristock.stock.units import format_value


def _value(text: str, option: str) -> float:
    try:
        return parse_number(text)
    except ValueError as err:
        raise UsageError(f"tristock catalog generate: {option}: {err}") from None


def _table_text(args: argparse.Namespace) -> str:
    from tristock.stock.tablegen import generate_capacitors, generate_resistors

    low, high = _value(args.low, "--from"), _value(args.high, "--to")
    if not 0 < low <= high:
        raise UsageError(
            f"tristock catalog generate: --from {args.low} and --to {args.high}: "
            "need 0 < from <= to"
        )
    if math.log10(high / low) > limits.GENERATE_MAX_DECADES:
        raise UsageError(
            f"tristock catalog generate: --from {args.low} --to {args.high} spans more than "
            f"{limits.GENERATE_MAX_DECADES} decades"
        )
    if args.kind == "resistor":
        return generate_resistors(
            args.series,
            low,
            high,
            args.tolerance,
            100.0 if args.tempco is None else args.tempco,
            args.power,
            args.package or "0603",
            args.cost,
            args.stock,
            args.prefix or "R",
        )
    if not args.dielectric:
        raise UsageError("tristock catalog generate: --dielectric is required for capacitors")
    return generate_capacitors(
        args.series,
        low,
        high,
        args.dielectric,
        args.tolerance,
        args.tempco,
        args.temp_band,
        args.voltage,
        args.package or "0805",
        args.cost,
        args.stock,
        args.prefix or "C",
    )


def generate(args: argparse.Namespace) -> int:
    from tristock.stock.tablegen import write_table

    try:
        text = _table_text(args)
    except (ValueError, CatalogError) as err:
        reason = str(err).replace("\n", "; ")
        raise UsageError(f"tristock catalog generate: {reason}") from None
    if not args.output:
        write_quietly(text, sys.stdout)
        return exits.OK
    try:
        write_table(args.output, text, overwrite=args.force)
    except FileExistsError:
        raise UsageError(
            f"tristock catalog generate: {args.output} exists (use --force to replace it)"
        ) from None
    emit(f"wrote {args.output}")
    return exits.OK


def check_text(catalog: Catalog) -> str:
    """What ``catalog check`` prints: the counts, what delay_s means, and every delay a table
    gave as delay_to_mid_s with what it was converted to."""
    lines = [f"ok: {catalog!r}", f"opamps.csv delay_s: {DELAY_MEANING}"]
    converted = [part for part in catalog.opamps if part.delay_to_mid_s is not None]
    if converted:
        lines.append(
            f"opamps.csv delay_to_mid_s (a datasheet's delay to 50 % of the output swing) given "
            f"for {len(converted)} part{'s' if len(converted) != 1 else ''}, converted to "
            "delay_s = delay_to_mid_s - step/(2·slew) with the step the part's full output swing "
            "at supply_max_v: "
            + ", ".join(
                f"{p.id} {format_value(p.delay_to_mid_s or 0.0, 's', 3)} -> "
                f"{format_value(p.delay_s, 's', 3)}"
                for p in converted
            )
        )
    return "\n".join(lines)


def run(args: argparse.Namespace) -> int:
    if args.action == "check":
        emit(check_text(load_catalog(args.dir)))
        return exits.OK
    if args.action == "generate":
        return generate(args)
    if args.delta:
        new = adjust_stock(args.dir, args.id, args.count)
        emit(f"{args.id}: stock {new - args.count} -> {new} ({args.count:+d})")
        return exits.OK
    if args.count < 0:
        raise UsageError(f"tristock catalog set-stock: COUNT {args.count} is below 0 (a change "
                         "of stock takes --delta)")  # fmt: skip
    old = set_stock(args.dir, args.id, args.count)
    emit(f"{args.id}: stock {old} -> {args.count} ({args.count - old:+d})")
    return exits.OK
