"""One side of a diff: pack files, directories, or ``REV:PATH`` in the working repository.

A side that cannot be loaded is bad input: the error names the side (OLD or NEW) and, for a
pack with errors, keeps every diagnostic of the file (shown as ``REV:PATH`` for revisions).
"""

from __future__ import annotations

import hashlib
import subprocess
from pathlib import Path

from verifier.check.model import Pack
from verifier.check.typer import check_pack
from verifier.errors import Diagnostic, PackError, UsageError
from verifier.lang.pack import parse_pack_text
from verifier.run.loader import discover, display_path, load_pack


def _git(args: list[str]) -> subprocess.CompletedProcess:
    try:
        return subprocess.run(["git", *args], capture_output=True, cwd=Path.cwd())
    except OSError as exc:
        raise UsageError(f"cannot run git: {exc.strerror or exc}") from None


def _label(side: str, exc: PackError) -> PackError:
    return PackError([Diagnostic(d.file, d.line, d.column, f"{side}: {d.message}", d.severity,
                                 d.source_line, d.length) for d in exc.diagnostics])


def _from_revision(spec: str, side: str) -> list[Pack]:
    rev, path = spec.split(":", 1)
    if _git(["rev-parse", "--show-toplevel"]).returncode != 0:
        raise UsageError(f"{side} {spec!r}: the working directory is not in a git repository")
    if not rev or _git(["rev-parse", "--verify", "--quiet", f"{rev}^{{commit}}"]).returncode != 0:
        raise UsageError(f"{side} {spec!r}: no revision {rev!r} in the working repository")
    listed = _git(["ls-tree", "-r", "--full-name", "--name-only", rev, "--", path or "."])
    names = [n for n in listed.stdout.decode("utf-8", "replace").splitlines()
             if n.endswith(".toml")] if listed.returncode == 0 else []
    if not names:
        raise UsageError(f"{side} {spec!r}: revision {rev} has no pack file at {path or '.'!r}")
    packs = []
    for name in sorted(names):
        blob = _git(["cat-file", "blob", f"{rev}:{name}"])
        shown = f"{rev}:{name}"
        if blob.returncode != 0:
            raise UsageError(f"{side} {spec!r}: cannot read {shown}")
        try:
            text = blob.stdout.decode("utf-8")
        except UnicodeDecodeError as exc:
            raise PackError([Diagnostic(shown, 1, 1, f"{side}: pack is not UTF-8 text (byte {exc.start})")]) from None
        try:
            packs.append(check_pack(parse_pack_text(text, shown, hashlib.sha256(blob.stdout).hexdigest())))
        except PackError as exc:
            raise _label(side, exc) from None
    return packs


def load_side(spec: str, side: str) -> list[Pack]:
    """The packs of one side (``side`` is "OLD" or "NEW"), in a fixed order, names unique."""
    p = Path(spec)
    if p.exists():
        packs = []
        for f in discover([p]):
            try:
                packs.append(load_pack(f, display_path(f)))
            except PackError as exc:
                raise _label(side, exc) from None
    elif ":" in spec:
        packs = _from_revision(spec, side)
    else:
        raise UsageError(f"{side} {spec!r}: no such file or directory (and not REV:PATH)")
    if not packs:
        raise UsageError(f"{side} {spec!r}: no pack files found")
    seen: dict = {}
    for pack in packs:
        if pack.name in seen:
            raise UsageError(f"{side}: pack name {pack.name!r} is used by both {seen[pack.name]} "
                             f"and {pack.path}")
        seen[pack.name] = pack.path
    return packs
