"""The positions a re-optimisation of a fixed board may change, for any searchable circuit.

A position is one designator the circuit's search form fills (``circuits.searchform``): the
stage's (U1; U1, U2 and a pull-up R5 for the comparator IC; U1, D1, D2 and R5 for the zener
clamp) and the divider pair, the integrator element and the capacitor (R1, R2, R3, C1). A
position may be empty on a board (a push-pull U2 has no pull-up R5); putting a part there or
taking it away is a change like any other.

Pinning a set of positions and forcing the others to change is a mask for the search
(``SearchModel.allowed``): over the stage options for the stage's positions (an option is
allowed when it keeps every pinned stage position's stock code and changes every forced
one), over the resistor and capacitor tables for the others.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tristock.circuits import TOPOLOGIES
from tristock.circuits.board import AnyBoard, board_from, resolve_board
from tristock.circuits.opamp_schmitt import OPAMP_SCHMITT
from tristock.circuits.searchform import SearchForm, StageOption
from tristock.circuits.topology import Topology
from tristock.search.model import SearchModel
from tristock.spec.loading import SpecError
from tristock.spec.model import Spec
from tristock.stock.catalog import Catalog


@dataclass(frozen=True)
class Positions:
    """The positions of ``topology`` (its search form ``form``): ``names`` in BOM order,
    ``stage`` those a stage option fills, ``table`` each other one with the engines' mask
    key (its designator: the divider's R1, R2, the integrator's R3, or R3A and R3B, the
    capacitor's C1)."""

    topology: Topology
    form: SearchForm
    names: tuple[str, ...]
    stage: tuple[str, ...]
    table: Mapping[str, str]

    def stage_ids(self, option: StageOption) -> dict[str, str | None]:
        """The stock code of each stage position of ``option`` (None: empty)."""
        return {d: (p.id if (p := option.parts.get(d)) is not None else None) for d in self.stage}

    def table_index(self, model: SearchModel, name: str, part_id: str | None) -> int | None:
        """The row of ``part_id`` in the table that fills position ``name``, or None."""
        table = model.capacitors if self.table[name] == "C1" else model.resistors
        return next((n for n, p in enumerate(table.parts) if p.id == part_id), None)

    def keepable(self, model: SearchModel, current: Mapping[str, str]) -> set[str]:
        """The positions that can keep their part (or stay empty) in some row of ``model``."""
        kept = {d for d in self.table if self.table_index(model, d, current.get(d)) is not None}
        for option in model.stages:
            ids = self.stage_ids(option)
            kept |= {d for d in self.stage if ids[d] == current.get(d)}
        return kept

    def masks(
        self, model: SearchModel, changed: Iterable[str], current: Mapping[str, str]
    ) -> dict[str, NDArray[np.bool_]] | None:
        """The search's masks with the positions in ``changed`` forced to another part (or
        to none, or to one where there is none) and the others keeping theirs; None when no
        stage option fits (no row can)."""
        moved = set(changed)
        stage = np.array(
            [
                all((ids[d] == current.get(d)) != (d in moved) for d in self.stage)
                for ids in (self.stage_ids(o) for o in model.stages)
            ],
            dtype=bool,
        ).reshape(-1)
        if not stage.any():
            return None
        masks = {"U1": stage}
        for name, key in self.table.items():
            size = len(model.capacitors if key == "C1" else model.resistors)
            at = self.table_index(model, name, current.get(name))
            mask = np.full(size, name in moved, dtype=bool)
            if at is not None:
                mask[at] = name not in moved
            masks[key] = mask
        return masks


def positions_of(topology: Topology) -> Positions:
    """The positions of ``topology``; SpecError (one line, naming the circuit) when it has no
    search form: no change count is proven."""
    form = topology.search_form()
    if form is None:
        raise SpecError(
            [
                f"circuit: {topology.name} has no exact re-optimisation yet, so a fewest-changes "
                "answer cannot be proven; search it again with the part withdrawn (limits or "
                "stock)"
            ]
        )
    table_names = (*form.divider, *form.integrator, form.capacitor)
    table = {d: d for d in table_names}
    names = tuple(d for d in topology.designators if d in table or d in form.stage_designators)
    stage = tuple(d for d in names if d in form.stage_designators)
    return Positions(topology, form, names, stage, table)


def board_topology(spec: Spec, current: Mapping[str, str], name: str | None = None) -> Topology:
    """The circuit of the board ``current`` (designator -> stock code): ``name`` (a DESIGN
    file's ``topology``) when given, else the spec's ``[circuit]``, else (``topology =
    "any"``) the first registered circuit that has every designator of the board and the
    board every one it requires. SpecError naming the field otherwise."""
    if name is None and spec.circuit.topology_name != "any":
        name = spec.circuit.topology_name
    if name is not None:
        if name not in TOPOLOGIES:
            known = ", ".join(TOPOLOGIES)
            raise SpecError([f"topology: {name!r} is not a circuit tristock knows ({known})"])
        return TOPOLOGIES[name]
    for topology in TOPOLOGIES.values():
        if set(current) <= set(topology.designators) and set(topology.required) <= set(current):
            return topology
    have = ", ".join(current)
    raise SpecError([f"parts: no circuit has exactly these designators ({have})"])


def check_designators(positions: Positions, current: Mapping[str, str]) -> None:
    """SpecError naming every designator of ``current`` the circuit's fixed boards do not
    have, and every one they need that it lacks."""
    topology = positions.topology
    errors = [
        f"parts.{d}: not a designator of a fixed {topology.name} board"
        for d in current
        if d not in positions.names
    ]
    errors += [f"parts.{d}: missing" for d in topology.required if d not in current]
    if errors:
        raise SpecError(errors)


def reoptimisable(spec: Spec, current: Mapping[str, str], name: str | None = None) -> Topology:
    """The circuit of the board ``current`` (``board_topology``), checked for a
    re-optimisation: a trimmed or tuned board is the op-amp Schmitt loop's; a fixed board's
    circuit has a search form (``positions_of``) and the board its designators
    (``check_designators``). SpecError naming the field otherwise."""
    topology = board_topology(spec, current, name)
    if spec.tuning is not None or spec.trimmed:
        if topology is not OPAMP_SCHMITT:
            raise SpecError([f"topology: {topology.name} boards are neither trimmed nor tuned"])
        return topology
    check_designators(positions_of(topology), current)
    return topology


def resolve_current(topology: Topology, current: Mapping[str, str], catalog: Catalog) -> AnyBoard:
    """The board of ``current`` on ``catalog`` as its topology builds it; SpecError naming
    each unknown or wrong-kind stock code."""
    return board_from(topology, resolve_board(topology, dict(current), catalog).parts())


__all__ = [
    "Positions",
    "board_topology",
    "check_designators",
    "positions_of",
    "reoptimisable",
    "resolve_current",
]
