"""The one error tree of `verifier`.

Every failure a user can cause is a :class:`PackError` carrying compiler-style
:class:`Diagnostic` records (``file:line:col: error: message``, the source line and a
caret). Failures of the tool itself are :class:`InternalError`. Nothing else is raised
on purpose across the public API.
"""

from __future__ import annotations

import attrs


@attrs.frozen
class Diagnostic:
    """One message about one place in one file (line and column are 1-based)."""

    file: str
    line: int
    column: int
    message: str
    severity: str = "error"  # "error" or "warning"
    source_line: str | None = None
    length: int = 1

    def render(self) -> str:
        head = f"{self.file}:{self.line}:{self.column}: {self.severity}: {self.message}"
        if self.source_line is None:
            return head
        text = self.source_line.rstrip("\n")
        caret = " " * max(0, self.column - 1) + "^" + "~" * max(0, min(self.length, 80) - 1)
        return f"{head}\n    {text}\n    {caret}"

    def as_json(self) -> dict:
        return {"file": self.file, "line": self.line, "column": self.column,
                "severity": self.severity, "message": self.message}


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


def file_error(path: str, message: str, line: int = 1, column: int = 1) -> PackError:
    """A PackError with a single diagnostic, for problems that concern a whole file."""
    return PackError([Diagnostic(str(path), line, column, message)])


def suggest(word: str, choices) -> str:
    """"; did you mean 'X'?" for the closest of ``choices`` to a misspelt ``word``, or ""."""
    import difflib
    close = difflib.get_close_matches(word, sorted(choices), n=1, cutoff=0.6)
    return f"; did you mean '{close[0]}'?" if close else ""
