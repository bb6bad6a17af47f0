"""Source positions for TOML files: where each key's value starts, and how an offset inside a
string value maps back to a file line and column.

``tomllib`` gives no positions, so this module scans the text for table headers and key
assignments. It only has to be right for files that ``tomllib`` accepted.
"""

from __future__ import annotations

import os
import re
import stat

import attrs

from verifier.errors import Diagnostic, PackError

MAX_FILE_BYTES = 4 * 1024 * 1024    # no pack, scenario or evidence file comes near this


def read_regular(path, shown: str, what: str = "pack") -> bytes:
    """The bytes of a regular file of at most MAX_FILE_BYTES; anything else (a FIFO, a device
    such as /dev/zero, a folder, a file too large) is a PackError, without blocking on it or
    reading it whole. The file is opened without blocking and checked after opening, so it
    cannot be swapped for a FIFO between the check and the read."""
    def refuse(message: str):
        return PackError([Diagnostic(shown, 1, 1, f"cannot read {what}: {message}")])
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0))
    except OSError as exc:
        raise refuse(exc.strerror or str(exc)) from None
    try:
        info = os.fstat(fd)
        if not stat.S_ISREG(info.st_mode):
            kind = ("a folder" if stat.S_ISDIR(info.st_mode) else "a FIFO" if stat.S_ISFIFO(info.st_mode)
                    else "a device" if stat.S_ISCHR(info.st_mode) or stat.S_ISBLK(info.st_mode)
                    else "a socket" if stat.S_ISSOCK(info.st_mode) else "special")
            raise refuse(f"not a regular file ({kind})")
        if info.st_size > MAX_FILE_BYTES:
            raise refuse(f"larger than {MAX_FILE_BYTES // (1024 * 1024)} MB ({info.st_size:,} bytes)")
        with os.fdopen(fd, "rb", closefd=True) as fh:
            fd = -1
            data = fh.read(MAX_FILE_BYTES + 1)     # a file that grew since fstat
    except OSError as exc:
        raise refuse(exc.strerror or str(exc)) from None
    finally:
        if fd >= 0:
            os.close(fd)
    if len(data) > MAX_FILE_BYTES:
        raise refuse(f"larger than {MAX_FILE_BYTES // (1024 * 1024)} MB")
    return data


def read_regular_text(path, shown: str, what: str) -> str:
    """:func:`read_regular`, decoded as UTF-8 (a file that is not UTF-8 is a PackError too)."""
    try:
        return read_regular(path, shown, what).decode("utf-8")
    except UnicodeDecodeError as exc:
        raise PackError([Diagnostic(shown, 1, 1, f"cannot read {what}: not UTF-8 ({exc.reason} "
                                    f"at byte {exc.start})")]) from None

_HEADER = re.compile(r"^\s*(\[\[?)\s*([A-Za-z0-9_.\-\" ]+?)\s*\]\]?\s*(#.*)?$")
_KEY = re.compile(r"^(\s*)([A-Za-z0-9_\-]+|\"[^\"]*\")\s*=\s*")


@attrs.frozen
class Place:
    """Where a value sits: the position of its first character and, for strings, the file
    offset of every character of the decoded text."""

    line: int
    column: int
    char_offsets: tuple | None = None  # file offsets of decoded characters (strings only)


class SourceFile:
    def __init__(self, path: str, text: str):
        self.path = path
        self.text = text
        self.lines = text.splitlines()
        self._line_starts = [0]
        for m in re.finditer("\n", text):
            self._line_starts.append(m.end())
        self.places: dict[tuple, Place] = {}
        self._scan()

    # ---- positions -------------------------------------------------------------------
    def line_col(self, offset: int) -> tuple[int, int]:
        lo, hi = 0, len(self._line_starts) - 1
        while lo < hi:
            mid = (lo + hi + 1) // 2
            if self._line_starts[mid] <= offset:
                lo = mid
            else:
                hi = mid - 1
        return lo + 1, offset - self._line_starts[lo] + 1

    def source_line(self, line: int) -> str | None:
        if 1 <= line <= len(self.lines):
            return self.lines[line - 1]
        return None

    def diag(self, line: int, column: int, message: str, severity: str = "error",
             length: int = 1) -> Diagnostic:
        return Diagnostic(self.path, line, column, message, severity,
                          self.source_line(line), length)

    def at_key(self, key: tuple, message: str, severity: str = "error",
               offset: int | None = None, length: int = 1) -> Diagnostic:
        """A diagnostic at a key's value (``offset``: a character inside a string value)."""
        place = self.places.get(key)
        if place is None:
            # fall back to the table header, then the top of the file
            place = self.places.get(key[:-1]) or self.places.get(key[:1]) or Place(1, 1)
        line, col = place.line, place.column
        if offset is not None and place.char_offsets:
            offs = place.char_offsets
            fo = offs[offset] if offset < len(offs) else (offs[-1] + 1 if offs else None)
            if fo is not None:
                line, col = self.line_col(fo)
        return self.diag(line, col, message, severity, length)

    # ---- scanning --------------------------------------------------------------------
    def _scan(self) -> None:
        table: tuple = ()
        counters: dict[str, int] = {}
        text = self.text
        i = 0
        n_lines = len(self._line_starts)
        line_no = 0
        while line_no < n_lines:
            start = self._line_starts[line_no]
            end = self._line_starts[line_no + 1] if line_no + 1 < n_lines else len(text)
            raw = text[start:end].rstrip("\n")
            header = _HEADER.match(raw)
            if header and not _KEY.match(raw):
                name = header.group(2).strip().replace('"', "")
                if header.group(1) == "[[":
                    idx = counters.get(name, 0)
                    counters[name] = idx + 1
                    table = (name, idx)
                else:
                    table = (name,)
                self.places.setdefault(table, Place(line_no + 1, raw.index("[") + 1))
                line_no += 1
                continue
            key = _KEY.match(raw)
            if key:
                name = key.group(2).strip('"')
                value_start = start + key.end()
                place, consumed_to = self._value_place(value_start)
                self.places.setdefault(table + (name,), place)
                if raw[key.end():].lstrip().startswith("{"):
                    self._scan_inline(table + (name,), value_start)
                # skip the lines a multi-line value took
                while line_no + 1 < n_lines and self._line_starts[line_no + 1] <= consumed_to:
                    line_no += 1
            line_no += 1
            i += 1

    def _scan_inline(self, prefix: tuple, start: int) -> None:
        depth = 0
        j = start
        text = self.text
        while j < len(text):
            ch = text[j]
            if ch == "{":
                depth += 1
            elif ch == "}":
                depth -= 1
                if depth == 0:
                    return
            elif ch in "\"'":
                _, j = self._value_place(j)
                continue
            else:
                m = re.match(r"([A-Za-z0-9_\-]+)\s*=\s*", text[j:])
                if m and (text[j - 1] in "{, \t"):
                    vstart = j + m.end()
                    place, _ = self._value_place(vstart)
                    self.places.setdefault(prefix + (m.group(1),), place)
                    j = vstart
                    continue
            j += 1

    def _value_place(self, start: int) -> tuple[Place, int]:
        """The place of the value starting at ``start`` and the offset just after it."""
        text = self.text
        line, col = self.line_col(start)
        for quote, multi in (('"""', True), ("'''", True), ('"', False), ("'", False)):
            if text.startswith(quote, start):
                j = start + len(quote)
                if multi and text.startswith("\n", j):
                    j += 1
                elif multi and text.startswith("\r\n", j):
                    j += 2
                offsets = []
                literal = quote.startswith("'")
                while j < len(text):
                    if text.startswith(quote, j):
                        # a closing quote run may carry up to two extra quote characters
                        if multi:
                            while text.startswith(quote[0], j + 3):
                                offsets.append(j)
                                j += 1
                        return Place(line, col, tuple(offsets)), j + len(quote)
                    ch = text[j]
                    if ch == "\\" and not literal:
                        nxt = text[j + 1:j + 2]
                        if nxt == "u":
                            offsets.append(j)
                            j += 6
                        elif nxt == "U":
                            offsets.append(j)
                            j += 10
                        elif nxt in ("\n", " ", "\t", "\r") and multi:
                            j += 1
                            while j < len(text) and text[j] in " \t\r\n":
                                j += 1
                        else:
                            offsets.append(j)
                            j += 2
                        continue
                    if not multi and ch == "\n":
                        break
                    offsets.append(j)
                    j += 1
                return Place(line, col, tuple(offsets)), j
        # a bare value: up to the end of the line
        eol = text.find("\n", start)
        return Place(line, col), (len(text) if eol < 0 else eol)
