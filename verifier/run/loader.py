"""Find, read and check rule packs: the front half of the flow (pack -> typed rules)."""

from __future__ import annotations

import hashlib
from pathlib import Path

from verifier.check.model import Pack
from verifier.check.typer import check_pack
from verifier.errors import Diagnostic, InternalError, PackError
from verifier.lang.pack import parse_pack_text, read_pack


def load_pack(path: str | Path, display: str | None = None) -> Pack:
    """Read and check one pack file; raise PackError listing every problem in it."""
    return check_pack(read_pack(path, display))


def pack_source(pack: Pack) -> tuple:
    """How a pack travels to a worker (a process here, or a Dask worker elsewhere): its path as
    shown, its text and the sha256 of that text, all plain strings (never solver objects)."""
    return (pack.path, pack.text, pack.sha256)


_FROM_SOURCE: dict = {}     # a worker's packs by (path, sha256): a worker decides many tasks


def pack_from_source(source: tuple) -> Pack:
    """The pack of :func:`pack_source`, checked again in the worker. The text must have the
    hash it came with (else the worker refuses it: an internal error, never a verdict)."""
    path, text, sha256 = source
    if hashlib.sha256(text.encode("utf-8")).hexdigest() != sha256:
        raise InternalError(f"the text of pack {path} that reached this worker does not have "
                            f"the hash it was sent with ({sha256[:16]}...)")
    key = (path, sha256)
    if key not in _FROM_SOURCE:
        if len(_FROM_SOURCE) >= 8:
            _FROM_SOURCE.clear()
        _FROM_SOURCE[key] = check_pack(parse_pack_text(text, path, sha256))
    return _FROM_SOURCE[key]


def display_path(path: Path) -> str:
    """A path as shown to users and written into files: relative to the working directory
    when it lies below it, always with '/'."""
    try:
        return path.resolve().relative_to(Path.cwd().resolve()).as_posix()
    except ValueError:
        return path.as_posix()


def discover(paths) -> list[Path]:
    """The pack files named by ``paths``: files as given, directories searched recursively
    for ``*.toml``, in a fixed (sorted) order. A file found twice (by two names) is kept once,
    where it was first found; each path is resolved once (linear in the number of files)."""
    found: list[Path] = []
    for p in paths:
        p = Path(p)
        if p.is_dir():
            found.extend(sorted(q for q in p.rglob("*.toml") if q.is_file()))
        elif p.exists() or p.is_symlink():
            found.append(p)
        else:
            raise PackError([Diagnostic(str(p), 1, 1, "no such file or directory")])
    unique: list[Path] = []
    seen: set[Path] = set()
    for p in found:
        key = p.resolve()
        if key not in seen:
            seen.add(key)
            unique.append(p)
    return unique


def _not_packs(paths) -> list[str]:
    """Files under folders of ``paths`` that look like packs but are not read as such (the
    suffix is matched exactly: ``.TOML`` is not a pack), for the hint of "no rules found"."""
    out = []
    for p in map(Path, paths):
        if p.is_dir():
            out += sorted(display_path(q) for q in p.rglob("*")
                          if q.suffix.lower() == ".toml" and q.suffix != ".toml" and q.is_file())
    return out


def nothing_to_check(paths, diags) -> Diagnostic:
    """The error of a check that found no rule at all: exit 2, never a green run."""
    paths = [Path(p) for p in paths] or [Path(".")]
    where = ", ".join(display_path(p) for p in paths)
    hint = ""
    odd = _not_packs(paths)
    if odd:
        hint = (f"; pack files end in '.toml' (lower case), not {', '.join(odd[:3])}"
                + (" ..." if len(odd) > 3 else ""))
    elif not any(d.severity == "warning" for d in diags):
        hint = "; no *.toml pack files there"
    return Diagnostic(display_path(paths[0]), 1, 1, f"no rules found in {where}{hint}")


def load_all(paths) -> tuple[list[Pack], list[Diagnostic]]:
    """Load every pack under ``paths``. Packs with errors are left out and their diagnostics
    returned; the others are checked. Pack names must be unique. Finding no rule (and no
    lemma) at all, with no error to explain it, is a PackError: "no rules found"."""
    paths = list(paths)
    packs: list[Pack] = []
    diags: list[Diagnostic] = []
    names: dict[str, str] = {}
    for f in discover(paths):
        shown = display_path(f)
        try:
            pack = load_pack(f, shown)
        except PackError as exc:
            diags.extend(exc.diagnostics)
            continue
        diags.extend(pack.warnings)
        if pack.name in names:
            diags.append(Diagnostic(shown, 1, 1, f"pack name '{pack.name}' is already used by "
                                    f"{names[pack.name]}"))
            continue
        names[pack.name] = shown
        packs.append(pack)
    if not any(d.severity == "error" for d in diags) and not any(p.rules or p.lemmas for p in packs):
        # nothing would be checked: an input error (exit 2), with the warnings that say why
        raise PackError([*diags, nothing_to_check(paths, diags)])
    return packs, diags
