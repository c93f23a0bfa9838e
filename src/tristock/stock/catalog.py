"""The stock room's part tables: load and validate them, and change stock counts safely.

A catalog is a directory with ``resistors.csv``, ``capacitors.csv``, ``opamps.csv`` and,
optionally, ``pots.csv`` and ``comparators.csv``. Each file has one header row and one part per
row; columns may come in any order. Loading is all-or-nothing: every problem in every file is
raised once as a :class:`CatalogError` whose issues print as ``file:line: column: message``.

This module gathers the public names of the ``tristock.stock`` package:

- :mod:`tristock.stock.columns`, :mod:`~tristock.stock.csvtext`, :mod:`~tristock.stock.rows`,
  :mod:`~tristock.stock.tables`: what the tables hold, their CSV dialect, row validation,
  tables and catalogs;
- :mod:`tristock.stock.writes` (with :mod:`~tristock.stock.snapshot`,
  :mod:`~tristock.stock.journal`, :mod:`~tristock.stock.locking`,
  :mod:`~tristock.stock.errors`): stock writes under a cross-platform lock that wait for other
  programs to finish, validate what they change, lose nothing written meanwhile, and remember
  idempotency keys;
- :func:`write_atomic` from :mod:`tristock.stock.atomicio`.
"""

from tristock.stock.atomicio import write_atomic
from tristock.stock.columns import (
    ALTERNATIVE_COLUMNS,
    COLUMNS,
    KINDS,
    OPTIONAL_COLUMNS,
    OPTIONAL_KINDS,
    CatalogError,
    CatalogIssue,
)
from tristock.stock.errors import (
    STOCK_MAX,
    CatalogBusy,
    CatalogWriteError,
    KeyReused,
    PreconditionFailed,
    StockError,
    UnknownPart,
)
from tristock.stock.journal import JOURNAL_NAME, FileStamp
from tristock.stock.locking import LOCK_NAME, catalog_lock, lock_path
from tristock.stock.rows import POT_KINDS, TOLERANCE_MAX_PCT, parse_number
from tristock.stock.tables import Catalog, load_catalog, parse_catalog, part_version, read_table
from tristock.stock.writes import (
    DEFAULT_POLICY,
    RequestKey,
    StockWrite,
    WritePolicy,
    adjust_stock,
    set_stock,
    update_stock,
)

__all__ = [
    "ALTERNATIVE_COLUMNS",
    "COLUMNS",
    "DEFAULT_POLICY",
    "JOURNAL_NAME",
    "KINDS",
    "LOCK_NAME",
    "OPTIONAL_COLUMNS",
    "OPTIONAL_KINDS",
    "POT_KINDS",
    "STOCK_MAX",
    "TOLERANCE_MAX_PCT",
    "Catalog",
    "CatalogBusy",
    "CatalogError",
    "CatalogIssue",
    "CatalogWriteError",
    "FileStamp",
    "KeyReused",
    "PreconditionFailed",
    "RequestKey",
    "StockError",
    "StockWrite",
    "UnknownPart",
    "WritePolicy",
    "adjust_stock",
    "catalog_lock",
    "load_catalog",
    "lock_path",
    "parse_catalog",
    "parse_number",
    "part_version",
    "read_table",
    "set_stock",
    "update_stock",
    "write_atomic",
]
