"""``verifier show``: one evidence file (a counterexample or a counterexample to induction)
checked again and told in words, its diagram drawn on request."""

from __future__ import annotations

from pathlib import Path
from typing import Callable

from verifier.errors import visible
from verifier.evidence import cexfile, ctistory, diagram, story


def show(file: str, pack_path: str | None = None, svg: str | None = None,
         recompute: Callable | None = None) -> tuple[str, str | None]:
    """The checked story, and the diagram written to ``svg`` when asked ("" = beside the file,
    "-" = returned instead of the story). ``recompute`` (``story.explain_file``) rebuilds the
    file of an implementation's counterexample: the caller, above evidence, runs it."""
    if ctistory.is_induction_file(Path(file)):
        e = ctistory.explain_file(file, pack_path=pack_path)
        if svg is None:
            return visible(e.text, keep="\n\t"), None
        text = diagram.render_induction(e.doc, e.rule, e.views)
    else:
        e = story.explain_file(file, pack_path=pack_path, recompute=recompute)
        if svg is None:
            return e.text, None
        text = diagram.render(e.doc, e.rule, e.state)
    if svg == "-":
        return text, None
    target = diagram.svg_path(Path(file)) if svg == "" else Path(svg)
    cexfile.write_atomic(target, text)
    return visible(e.text, keep="\n\t"), target.as_posix()
