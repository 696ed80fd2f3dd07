"""TOML reading that can point at the line a key sits on (for error messages)."""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

from sicheck.errors import InputError


class TomlSource:
    def __init__(self, path: str | Path, what: str):
        self.path = str(path)
        try:
            raw = Path(path).read_text(encoding="utf-8-sig")
        except FileNotFoundError:
            raise InputError(f"{what} file not found", file=self.path) from None
        except (OSError, UnicodeDecodeError) as e:
            raise InputError(f"cannot read {what} file: {e}", file=self.path) from None
        try:
            self.data = tomllib.loads(raw)
        except tomllib.TOMLDecodeError as e:
            m = re.search(r"line (\d+)", str(e))
            raise InputError(f"TOML syntax error: {e}", file=self.path,
                             line=int(m.group(1)) if m else None) from None
        self.raw = raw
        self.lines = raw.splitlines()

    def block(self, header: str | None, index: int = 0) -> tuple[int, int]:
        """Line range (0-based, end exclusive) of the index-th ``[header]``/``[[header]]``; None = top."""
        heads = [n for n, l in enumerate(self.lines) if re.match(r"^\s*\[", l)]
        if header is None:
            return 0, heads[0] if heads else len(self.lines)
        pat = re.compile(rf"^\s*\[\[?\s*{re.escape(header)}\s*\]\]?")
        mine = [n for n in heads if pat.match(self.lines[n])]
        if index >= len(mine):
            return 0, len(self.lines)
        start = mine[index]
        later = [n for n in heads if n > start]
        return start, later[0] if later else len(self.lines)

    def line_of(self, key: str, header: str | None = None, index: int = 0) -> int | None:
        start, end = self.block(header, index)
        pat = re.compile(rf"^\s*[\"']?{re.escape(key)}[\"']?\s*=")
        for n in range(start, end):
            if pat.match(self.lines[n]):
                return n + 1
        return start + 1 if header else None

    def error(self, msg: str, key: str | None = None, header: str | None = None, index: int = 0) -> InputError:
        line = self.line_of(key, header, index) if key else (self.block(header, index)[0] + 1 if header else None)
        return InputError(msg, file=self.path, line=line, key=key)


def named_tables(src: TomlSource, section: str, raw: list, allowed, what: str):
    """Each ``[[section]]`` table of a file, checked: a table, only ``allowed`` keys, a non-empty name.

    Yields (index, first line, table, stripped name); errors name the file, the line and the key.
    """
    for i, t in enumerate(raw):
        line = src.block(section, i)[0] + 1
        if not isinstance(t, dict):
            raise InputError(f"{section} must be written as [[{section}]] tables", file=src.path, line=line,
                             key=section)
        for key in t:
            if key not in allowed:
                raise src.error(f"unknown key '{key}' in a {what} (allowed: {', '.join(allowed)})", key, section, i)
        name = t.get("name")
        if not isinstance(name, str) or not name.strip():
            raise src.error(f"every [[{section}]] needs a name", "name", section, i)
        yield i, line, t, name.strip()
