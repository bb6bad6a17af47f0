"""What the command line shows: the check table (plain, or in colour on a terminal) and the live
progress line, both through rich.

The table is one list of styled lines. Piped, with ``--color never`` or with ``NO_COLOR`` set
it is printed without its styles: the same text, byte for byte, as before colour existed. On a
terminal each verdict gets a colour *and* keeps its word (a colour is never the only sign), and
the lines fold to the terminal when it is narrower than the table's 100 columns.
"""

from __future__ import annotations

import os
import sys
import textwrap

from rich.console import Console
from rich.progress import BarColumn, Progress, ProgressColumn, SpinnerColumn, TextColumn
from rich.text import Text

from verifier.about import CAUTION
from verifier.run import coverage
from verifier.run.engine import VERDICTS, proof_detail, proof_words

TABLE_WIDTH = 100
COLOR_CHOICES = ("auto", "always", "never")

# a colour for each verdict; the word is always printed beside it
VERDICT_STYLE = {"holds": "green", "violated": "bold red", "vacuous": "bold yellow",
                 "bounded": "yellow", "unknown": "magenta", "error": "bold red reverse"}
PACK_STYLE = "bold"
LABEL_STYLE = "cyan"          # the scope's labels, "summary:", "note:"
DETAIL_STYLE = "dim"          # proof details under a row (counterexample paths stay plain)


def wants_color(choice: str, stream, environ=None) -> bool:
    """Colour for ``--color CHOICE`` on ``stream``: always, never, or (auto) when the stream is a
    terminal, ``NO_COLOR`` is unset or empty and ``TERM`` is not ``dumb``. An explicit
    ``--color always`` wins over ``NO_COLOR``, as no-color.org asks of command-line flags."""
    environ = os.environ if environ is None else environ
    if choice == "always":
        return True
    if choice == "never" or environ.get("NO_COLOR", "") or environ.get("TERM") == "dumb":
        return False
    isatty = getattr(stream, "isatty", None)
    return bool(isatty and isatty())


def fold(lines: list, width: int = TABLE_WIDTH) -> list:
    """Styled lines (rich ``Text``) folded to ``width`` columns, each continuation under the
    text it continues; a word longer than a line (a long path) is kept whole on a line of its
    own. Styles follow their characters onto the folded lines."""
    out = []
    for line in lines:
        plain = line.plain
        if len(plain) <= width:
            out.append(line)
            continue
        body = plain.lstrip(" ")
        lead = len(plain) - len(body)
        hang = lead if lead else len(body.split(" ", 1)[0]) + 1     # "note: ", "summary: "
        cursor = 0
        for k, piece in enumerate(textwrap.wrap(body, width=width, initial_indent=" " * lead,
                                                subsequent_indent=" " * hang,
                                                break_long_words=False, break_on_hyphens=False)):
            indent = lead if k == 0 else hang
            content = piece[indent:]
            at = body.index(content, cursor)         # the words are kept as they are
            cursor = at + len(content)
            out.append(Text(" " * indent) + line[lead + at:lead + cursor])
    return out


def _line(*pieces) -> Text:
    """A line from text pieces and (text, style) pairs."""
    return Text.assemble(*pieces)


def check_lines(results, input_diags, scope_width: int = coverage.WIDTH) -> list:
    """The table of ``verifier check`` as styled lines (unfolded, but the scope's block is
    wrapped at ``scope_width``)."""
    lines = []
    counts = dict.fromkeys(VERDICTS, 0)
    lemma_counts = dict.fromkeys(VERDICTS, 0)

    def detail(text, style=DETAIL_STYLE):
        lines.append(_line("            ", (text, style)))

    for p in results:
        lines.append(_line("pack ", (p.name, PACK_STYLE), f" ({p.path})"))
        if p.scope:
            for text in coverage.lines(p.scope, width=scope_width):
                label = text[:12].strip()    # "  scope     ", "  world     ", ...
                lines.append(_line(text[:2], (label, LABEL_STYLE), text[2 + len(label):]))
        width = max((len(r.rule) + (6 if r.role == "lemma" else 0) for r in p.results), default=10)
        for r in p.results:
            (lemma_counts if r.role == "lemma" else counts)[r.verdict] += 1
            verdict = r.verdict if r.verdict != "error" else f"error ({r.kind})"
            name = f"lemma {r.rule}" if r.role == "lemma" else r.rule
            lines.append(_line("  ", (verdict, VERDICT_STYLE[r.verdict]), " " * (9 - len(verdict)),
                               f" {name:<{width}}  {proof_words(r):<18} {r.seconds:6.2f} s",
                               ("  (cached)" if r.cached else "", DETAIL_STYLE)))
            if r.premise:
                detail(f"implicit premise: {r.premise}", "")
            if proof_detail(r):
                detail(proof_detail(r))
            if r.counterexample:
                detail(f"counterexample: {r.counterexample}", "")
            if r.write_error:
                detail(f"not written: {r.write_error}", "bold red")
            if r.induction:
                detail(f"counterexample to induction: {r.induction}", "")
            if r.message and r.verdict != "holds":
                detail(r.message, "")
    errors = sum(1 for d in input_diags if d.severity == "error")
    summary = [", "]
    for v in VERDICTS:
        summary += [f"{counts[v]} ", (v, VERDICT_STYLE[v] if counts[v] else ""), ", "]
    summary.pop()
    if any(lemma_counts.values()):
        summary.append("; lemmas: ")
        for v in VERDICTS:
            if lemma_counts[v]:
                summary += [f"{lemma_counts[v]} ", (v, VERDICT_STYLE[v]), ", "]
        summary.pop()
    if errors:
        summary.append((f"; {errors} input error{'s' if errors != 1 else ''} (packs with errors "
                        "were not checked)", "bold red"))
    lines.append(_line(("summary:", LABEL_STYLE), " ", *summary[1:]))
    lines.append(_line(("note:", LABEL_STYLE), f" {CAUTION}"))
    return lines


def plain_table(results, input_diags) -> str:
    """The table as piped output: no styles, folded to 100 columns."""
    return "\n".join(t.plain for t in fold(check_lines(results, input_diags)))


def print_table(results, input_diags, file=None, color: bool = False) -> None:
    """Print the table on ``file`` (stdout): in colour, folded to the terminal's width (at most
    100 columns), or plain."""
    file = sys.stdout if file is None else file
    if not color:
        print(plain_table(results, input_diags), file=file)
        return
    console = Console(file=file, force_terminal=True, no_color=False, highlight=False,
                      emoji=False, soft_wrap=True)
    width = max(min(TABLE_WIDTH, _columns(file)), 40)
    for t in fold(check_lines(results, input_diags, width - 2), width):
        console.print(t)


def _columns(file) -> int:
    """The width of the terminal ``file`` is, or the table's width when it is not one."""
    try:
        return os.get_terminal_size(file.fileno()).columns
    except (AttributeError, ValueError, OSError):      # no descriptor, or not a terminal
        return TABLE_WIDTH


class _Seconds(ProgressColumn):
    """The elapsed time as "12.3 s", as the plain line said it."""

    def render(self, task) -> Text:
        return Text(f"{task.elapsed or 0:.1f} s")


class _Done(ProgressColumn):
    """Rules done of the total ("12/71 rules"), or nothing for a progress without a count."""

    def render(self, task) -> Text:
        if task.total is None:
            return Text("")
        return Text(f"{int(task.completed)}/{int(task.total)} rules done")


class LiveProgress:
    """A live line on stderr while rules are solved: a spinner, rules done of N, a bar, the
    elapsed time and the rule being solved (``verifier check``), or a line of status
    (``say``: diff, test). On a terminal only; it leaves nothing behind when it stops."""

    def __init__(self, enabled: bool, color: bool = True):
        self.enabled = enabled
        self._bar = None
        self._task = None
        if enabled:
            console = Console(file=sys.stderr, force_terminal=True, no_color=not color,
                              highlight=False, emoji=False)
            self._bar = Progress(SpinnerColumn(), _Done(), BarColumn(bar_width=20), _Seconds(),
                                 TextColumn("{task.description}"), console=console,
                                 transient=True, redirect_stdout=False, redirect_stderr=True)

    def _start(self, total) -> None:
        if self._task is None:
            self._bar.start()
            self._task = self._bar.add_task("", total=total)

    def __call__(self, n, total, pack, rule, result) -> None:
        """The engine's callback: rule n of total starts (result None) or is done."""
        if not self.enabled:
            return
        self._start(total)
        if result is None:
            self._bar.update(self._task, total=total, completed=n - 1,
                             description=f"{pack.name}/{rule.id}")
        else:
            self._bar.update(self._task, total=total, completed=n)

    def say(self, line: str) -> None:
        """Show one line of status in place of the last one."""
        if not self.enabled:
            return
        self._start(None)
        self._bar.update(self._task, description=line)

    def clear(self) -> None:
        """Stop, and take the line off the screen."""
        if self._task is not None:
            self._bar.stop()
            self._task = None
