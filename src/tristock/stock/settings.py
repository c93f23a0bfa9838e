"""``catalog.toml``: optional settings of a stock room, beside its tables.

```toml
name = "Fennmoor Instruments demo stock room"   # shown in reports (optional)
currency = "EUR"                                 # the unit of every unit_cost (optional)
```

Both keys are optional, and so is the file; any other key is an error. ``currency`` is
1 to 8 letters or currency signs (an ISO 4217 code such as ``EUR`` is the usual choice);
without it costs are shown as plain numbers ("currency units"). Problems are reported as
``catalog.toml:LINE: KEY: message`` (``CatalogError``), like the tables' own.
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass
from pathlib import Path

from tristock.stock.columns import CatalogError, CatalogIssue

SETTINGS_NAME = "catalog.toml"
KEYS = ("name", "currency")
_CURRENCY = re.compile(r"^[^\W\d_]{1,8}$|^[\$€£¥₹₩₽¤]$")
_TOML_POSITION = re.compile(r"\(at line (\d+), column \d+\)")


@dataclass(frozen=True)
class CatalogSettings:
    """A stock room's settings; None where ``catalog.toml`` (or the key) is absent."""

    name: str | None = None
    currency: str | None = None

    @property
    def cost_unit(self) -> str:
        """How costs are labelled: the currency, or "currency units" without one."""
        return self.currency or "currency units"


def _line_of(text: str, key: str) -> int | None:
    """The line (from 1) where ``key = ...`` is set, if it is set at the top level."""
    pattern = re.compile(rf"^\s*[\"']?{re.escape(key)}[\"']?\s*=")
    for n, line in enumerate(text.splitlines(), start=1):
        if pattern.match(line):
            return n
    return None


def parse_settings(text: str, file: str = SETTINGS_NAME) -> CatalogSettings:
    """Settings from the text of ``catalog.toml``; CatalogError lists every problem."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        where = _TOML_POSITION.search(str(err))
        message = _TOML_POSITION.sub("", str(err)).strip()
        line = int(where.group(1)) if where else None
        raise CatalogError([CatalogIssue(file, line, None, f"not valid TOML: {message}")]) from None
    issues: list[CatalogIssue] = []
    values: dict[str, str] = {}
    for key, value in data.items():
        line = _line_of(text, key)
        if key not in KEYS:
            issues.append(CatalogIssue(file, line, key, f"unknown key (known: {', '.join(KEYS)})"))
        elif not isinstance(value, str) or not value.strip():
            issues.append(CatalogIssue(file, line, key, "must be a non-empty string"))
        elif key == "currency" and not _CURRENCY.match(value):
            issues.append(
                CatalogIssue(file, line, key, f"{value!r}: 1 to 8 letters (e.g. EUR) or one sign")
            )
        else:
            values[key] = value.strip()
    if issues:
        raise CatalogError(issues)
    return CatalogSettings(**values)


def read_settings(directory: Path) -> CatalogSettings:
    """The settings of the catalog in ``directory`` (defaults when it has no
    ``catalog.toml``); CatalogError when the file does not read or validate."""
    path = Path(directory) / SETTINGS_NAME
    if not path.is_file():
        return CatalogSettings()
    try:
        text = path.read_bytes().decode("utf-8")
    except UnicodeDecodeError:
        raise CatalogError([CatalogIssue(SETTINGS_NAME, None, None, "not UTF-8 text")]) from None
    except OSError as err:
        reason = err.strerror or str(err)
        raise CatalogError([CatalogIssue(SETTINGS_NAME, None, None, reason)]) from None
    return parse_settings(text)


__all__ = ["KEYS", "SETTINGS_NAME", "CatalogSettings", "parse_settings", "read_settings"]
