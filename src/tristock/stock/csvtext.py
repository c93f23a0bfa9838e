"""The CSV dialect of the part tables, read field by field with each field's position.

One header row, one part per row, fields separated by commas. A field may be enclosed in double
quotes (a doubled quote inside stands for one) but may not span lines; blanks around a field are
not part of it. Lines are split on LF only, so a CRLF file keeps its CR in each line's ending;
a leading UTF-8 byte-order mark is allowed. Positions let a writer change one field in place.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True, slots=True)
class Field:
    """One CSV field: its text (unquoted, stripped) and the span of that text in the line."""

    text: str
    start: int
    end: int


def split_fields(line: str) -> list[Field]:
    """Split one CSV line (without its line ending) into fields.

    Raises ValueError on bad quoting (unterminated quote, text after a closing quote, a stray
    quote in an unquoted field), naming the column.
    """
    fields: list[Field] = []
    i, n = 0, len(line)
    while True:
        while i < n and line[i] in " \t":
            i += 1
        if i < n and line[i] == '"':
            field, i = _quoted(line, i)
            fields.append(field)
        else:
            comma = line.find(",", i)
            stop = n if comma < 0 else comma
            raw = line[i:stop]
            if '"' in raw:
                raise ValueError(f"stray quote in unquoted field at column {i + 1}")
            text = raw.rstrip(" \t")
            fields.append(Field(text, i, i + len(text)))
            i = stop
        if i >= n:
            return fields
        i += 1  # past the comma
        if i >= n:
            fields.append(Field("", i, i))
            return fields


def _quoted(line: str, i: int) -> tuple[Field, int]:
    """The quoted field opening at ``line[i]``; the index of what follows it (comma or end)."""
    n = len(line)
    start = i + 1
    j = start
    chars: list[str] = []
    while True:
        if j >= n:
            raise ValueError(f"unterminated quote starting at column {start}")
        if line[j] == '"':
            if j + 1 < n and line[j + 1] == '"':
                chars.append('"')
                j += 2
                continue
            break
        chars.append(line[j])
        j += 1
    i = j + 1
    while i < n and line[i] in " \t":
        i += 1
    if i < n and line[i] != ",":
        raise ValueError(f"text after a closing quote at column {i + 1}")
    return Field("".join(chars), start, j), i


def physical_lines(text: str) -> list[str]:
    """The file's lines split on LF only, each keeping its terminator (CRLF or LF or none)."""
    parts = text.split("\n")
    lines = [p + "\n" for p in parts[:-1]]
    if parts[-1]:
        lines.append(parts[-1])
    return lines


def line_content(line: str) -> str:
    """A physical line without its LF or CRLF ending."""
    if line.endswith("\n"):
        line = line[:-1]
    if line.endswith("\r"):
        line = line[:-1]
    return line


def is_skipped(content: str) -> bool:
    """Blank lines and ``#`` comment lines carry no row."""
    stripped = content.strip()
    return not stripped or stripped.startswith("#")


def decode_table(data: bytes) -> str:
    """UTF-8 text without a leading byte-order mark; UnicodeDecodeError if not UTF-8."""
    text = data.decode("utf-8")
    return text[1:] if text.startswith("\ufeff") else text
