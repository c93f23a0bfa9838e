"""Why a stock write did not happen. In every case the tables are left exactly as they were.

- :class:`StockError` (a ValueError): the request itself is refused: a bad count, a stock that
  would leave 0..:data:`STOCK_MAX`, an unknown or repeated id, a failed precondition, an
  idempotency key reused for another request.
- :class:`CatalogBusy` and :class:`CatalogWriteError` are :class:`CatalogError`\\ s with one
  issue naming the file: the tables kept changing, the lock was not free in time, or the
  operating system refused the write (read-only folder, disk full). A caller may retry later.
- A table that fails validation raises the plain :class:`CatalogError` with every
  ``file:line: column: message``: nothing is written over a table that does not load.
"""

from __future__ import annotations

import errno
from typing import Final

from tristock.stock.columns import CatalogError, CatalogIssue

#: The most pieces of one part a table may record through a stock write.
STOCK_MAX: Final[int] = 1_000_000_000


class StockError(ValueError):
    """A stock update was refused (unknown id, bad count, or the stock would leave its range)."""


class UnknownPart(StockError):
    """No part with this id (in this table, when a kind was given)."""


class PreconditionFailed(StockError):
    """The part's current version tag is none of the ones the caller expected."""

    def __init__(self, message: str, current_version: str) -> None:
        super().__init__(message)
        self.current_version = current_version


class KeyReused(StockError):
    """An idempotency key came back with a different request, or its first outcome is unknown."""


class CatalogBusy(CatalogError):
    """The write could not start in time; ``retry_after_s`` is a fair wait before retrying."""

    def __init__(self, file: str, message: str, retry_after_s: float) -> None:
        super().__init__([CatalogIssue(file, None, None, message)])
        self.retry_after_s = retry_after_s


class CatalogWriteError(CatalogError):
    """The operating system refused the write (``errno`` says why); the table is unchanged."""

    def __init__(self, file: str, error: OSError) -> None:
        reason = error.strerror or str(error)
        hint = _HINTS.get(error.errno or 0, "")
        super().__init__(
            [
                CatalogIssue(
                    file, None, None, f"cannot write: {reason}{hint}; the table is unchanged"
                )
            ]
        )
        self.errno = error.errno


_HINTS: Final[dict[int, str]] = {
    errno.ENOSPC: " (the disk is full)",
    errno.EROFS: " (the folder is on a read-only file system)",
    errno.EACCES: " (no write permission on the catalog folder)",
    errno.EPERM: " (no write permission on the catalog folder)",
    errno.EDQUOT: " (disk quota exceeded)",
    errno.EFBIG: " (file size limit exceeded)",
}
