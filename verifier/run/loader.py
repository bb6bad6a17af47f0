"""Find, read and check rule packs: the front half of the flow (pack -> typed rules)."""

from __future__ import annotations

from pathlib import Path

from verifier.check.model import Pack
from verifier.check.typer import check_pack
from verifier.errors import Diagnostic, PackError
from verifier.lang.pack import read_pack


def load_pack(path: str | Path, display: str | None = None) -> Pack:
    """Read and check one pack file; raise PackError listing every problem in it."""
    return check_pack(read_pack(path, display))


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
