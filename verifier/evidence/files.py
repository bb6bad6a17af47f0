"""The evidence writer the engine is given (``verifier.run.engine.check_packs(..., files=...)``):
each counterexample with its diagram, each counterexample to induction with its drawing, the
pair written or neither. The run stage calls it and writes nothing itself."""

from __future__ import annotations

from pathlib import Path

import attrs

from verifier.check.model import Pack, Rule
from verifier.evidence import cexfile, diagram
from verifier.world.scenario import legs_from_flat
from verifier.world.sim import State


@attrs.frozen
class Files:
    """Write under ``out`` (``--out``); each method returns the JSON file's path as text and
    raises ``verifier.errors.WriteError`` when the pair cannot be written."""

    out: Path

    def counterexample(self, pack: Pack, rule: Rule, st: State, *, bound: int, solver: str,
                       minimal: bool) -> str:
        doc = cexfile.build(pack, rule, st, verdict="violated", bound=bound, solver=solver,
                            minimal=minimal)
        target = cexfile.cex_path(self.out, pack, rule)
        cexfile.write_files(self.out, [(target, cexfile.dumps(doc)),
                                       (diagram.svg_path(target), diagram.render(doc, rule, st))])
        return target.as_posix()

    def margin(self, pack: Pack, rule: Rule, st: State, *, what: str, verdict: str, bound: int,
               scope, note: str) -> str:
        """A world a margin was found in (``verifier margin``: where the slack is least, or the
        first failing world past a threshold) and its diagram, as ``<pack>/<rule>.<what>.json``
        (``out`` is not the counterexamples' folder, which ``replay`` re-judges whole); ``scope``
        is the real world's (a threshold moves one bound)."""
        doc = cexfile.build(pack, rule, st, verdict=verdict, bound=bound, solver="",
                            minimal=True)
        doc["scope"] = scope.as_json()
        doc["margin"] = {"what": what, "note": note}
        target = self.out / pack.name / f"{rule.id}.{what}.json"
        cexfile.write_files(self.out, [(target, cexfile.dumps(doc)),
                                       (diagram.svg_path(target), diagram.render(doc, rule, st))])
        return target.as_posix()

    def induction(self, pack: Pack, rule: Rule, lemmas, outcome, bound: int, solver: str) -> str:
        """The counterexample to induction of ``outcome`` (``verifier.run.induct.prove``) and its
        diagram, beside the counterexamples."""
        doc = cexfile.build_induction(pack, rule, lemmas, outcome.views, outcome.plan,
                                      legs_from_flat(outcome.cti["legs"]), bound=bound,
                                      minimal=outcome.minimal, solver=solver)
        target = cexfile.induction_path(self.out, pack, rule)
        cexfile.write_files(self.out, [(target, cexfile.dumps(doc)),
                                       (diagram.svg_path(target),
                                        diagram.render_induction(doc, rule, outcome.views))])
        return target.as_posix()
