"""What every layer reads of a board, as a protocol: the circuits below ``circuits.board``
(the topologies and their search forms) take boards through it without importing the board
types, which import them."""

from __future__ import annotations

from typing import Protocol

from tristock.stock.parts import Part


class BoardParts(Protocol):
    """What a topology reads of a board (``circuits.board.Design``): one part per designator
    and the pot's setting (its wiper, how it is wired, the range capacitor in use)."""

    @property
    def wiper(self) -> float: ...

    @property
    def control(self) -> str: ...

    @property
    def selected(self) -> int: ...

    def parts(self) -> dict[str, Part]: ...
