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
    for ``*.toml``, in a fixed (sorted) order."""
    found: list[Path] = []
    for p in paths:
        p = Path(p)
        if p.is_dir():
            found.extend(sorted(q for q in p.rglob("*.toml") if q.is_file()))
        elif p.exists():
            found.append(p)
        else:
            raise PackError([Diagnostic(str(p), 1, 1, "no such file or directory")])
    unique: list[Path] = []
    for p in found:
        if p.resolve() not in {q.resolve() for q in unique}:
            unique.append(p)
    return unique


def load_all(paths) -> tuple[list[Pack], list[Diagnostic]]:
    """Load every pack under ``paths``. Packs with errors are left out and their diagnostics
    returned; the others are checked. Pack names must be unique."""
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
    return packs, diags
