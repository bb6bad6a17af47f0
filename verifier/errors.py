"""The one error tree of `verifier`.

Every failure a user can cause is a :class:`PackError` carrying compiler-style
:class:`Diagnostic` records (``file:line:col: error: message``, the source line and a
caret). Failures of the tool itself are :class:`InternalError`. Nothing else is raised
on purpose across the public API.
"""

from __future__ import annotations

import re
from pathlib import Path

import attrs

# C0 controls, DEL and C1 controls: they clear terminals and are not allowed in XML 1.0
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f]")
ECHO_WIDTH = 100        # characters of a source line echoed under a diagnostic
MESSAGE_WIDTH = 400     # characters of a message (values quoted in it are user text)
ELLIPSIS = "..."


def control_char(text: str, keep: str = "") -> str | None:
    """The first control character of ``text`` not in ``keep``, or None."""
    for m in _CONTROL.finditer(text):
        if m.group() not in keep:
            return m.group()
    return None


def visible(text: str, keep: str = "\n") -> str:
    """``text`` with each control character not in ``keep`` written as an escape (``\\x1b``),
    so that it can neither drive a terminal nor make XML invalid."""
    return _CONTROL.sub(lambda m: m.group() if m.group() in keep else f"\\x{ord(m.group()):02x}", text)


def clip(text: str, width: int = MESSAGE_WIDTH) -> str:
    """``text`` cut to ``width`` characters with an ellipsis in the middle (the end of a message
    often carries a suggestion)."""
    if len(text) <= width:
        return text
    tail = width // 4
    return text[:width - tail - len(ELLIPSIS)] + ELLIPSIS + text[-tail:]


def _message(text) -> str:
    return clip(str(text))


@attrs.frozen
class Diagnostic:
    """One message about one place in one file (line and column are 1-based)."""

    file: str
    line: int
    column: int
    message: str = attrs.field(converter=_message)
    severity: str = "error"  # "error" or "warning"
    source_line: str | None = None
    length: int = 1

    def render(self) -> str:
        head = (f"{visible(self.file, keep='')}:{self.line}:{self.column}: {self.severity}: "
                + visible(self.message, keep="\n"))
        if self.source_line is None:
            return head
        text, col = _echo(self.source_line.rstrip("\n"), max(0, self.column - 1))
        room = max(1, len(text) - col)
        caret = " " * col + "^" + "~" * max(0, min(self.length, 80, room) - 1)
        return f"{head}\n    {text}\n    {caret}"

    def as_json(self) -> dict:
        return {"file": self.file, "line": self.line, "column": self.column,
                "severity": self.severity, "message": self.message}


def _echo(line: str, col: int) -> tuple[str, int]:
    """A source line cut to ECHO_WIDTH characters around column ``col`` (0-based), control
    characters made visible; returns the text and the caret's column in it."""
    start = 0
    if len(line) > ECHO_WIDTH:
        start = max(0, min(col - ECHO_WIDTH // 3, len(line) - ECHO_WIDTH))
    end = start + ECHO_WIDTH
    head = ELLIPSIS if start > 0 else ""
    before = head + visible(line[start:col], keep="\t")
    text = before + visible(line[col:end], keep="\t") + (ELLIPSIS if end < len(line) else "")
    return text, len(before)


class VerifierError(Exception):
    """Base of every error raised on purpose by `verifier`."""


class PackError(VerifierError):
    """Bad input: a pack, scenario or counterexample file that cannot be used (exit code 2)."""

    def __init__(self, diagnostics: list[Diagnostic] | tuple[Diagnostic, ...]):
        self.diagnostics = tuple(diagnostics)
        super().__init__("\n".join(d.render() for d in self.diagnostics))


class UsageError(VerifierError):
    """A command line that cannot be carried out (exit code 2)."""


class InternalError(VerifierError):
    """The tool disagrees with itself (for example simulator and solver): a bug (exit code 4)."""


class TaskLost(VerifierError):
    """A task given to an executor whose result cannot be had (its worker died or was lost,
    and a retry did not bring it back). Never a verdict: each caller makes it ``unknown``."""


class WriteError(OSError):
    """A file of ours could not be written: the path and the operating system's reason. The
    command line reports it after the verdicts, as exit 2 (an OSError, not a VerifierError: the
    input was fine, the disk was not)."""

    def __init__(self, path, reason: str):
        super().__init__(f"cannot write {Path(path).as_posix()}: {reason}")
        self.path, self.reason = Path(path), reason


def file_error(path: str, message: str, line: int = 1, column: int = 1) -> PackError:
    """A PackError with a single diagnostic, for problems that concern a whole file."""
    return PackError([Diagnostic(str(path), line, column, message)])


def suggest(word: str, choices) -> str:
    """"; did you mean 'X'?" for the closest of ``choices`` to a misspelt ``word``, or ""."""
    import difflib
    close = difflib.get_close_matches(word, sorted(choices), n=1, cutoff=0.6)
    return f"; did you mean '{close[0]}'?" if close else ""
