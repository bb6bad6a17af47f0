"""Typed packs: what the checker hands to the simulator and to the SMT encoder."""

from __future__ import annotations

import attrs

from verifier.lang import ast
from verifier.lang.scope import Scope


@attrs.frozen
class Formula:
    """A checked expression. ``node`` is typed and its names are resolved."""

    name: str           # "let reversed", "onboard l_doubtover", "rule x expect", ...
    text: str
    node: ast.Node
    key: tuple          # TOML key, for diagnostics
    default: bool = False
    deps: frozenset = frozenset()   # direct definitions read: ("let", n), ("onboard", n), ("trackside", n)


@attrs.frozen
class Rule:
    id: str
    title: str
    given: Formula | None
    expect: Formula
    refs: tuple
    note: str
    legs: int | None            # the rule's own bound, if it sets one
    line: int
    premise_legs: int           # legs[i] used: the rule only applies when legs.count >= this
    deps: frozenset             # the whole dependency closure: ("let", n), ("onboard", n), ...
    reads: frozenset            # vocabulary names read through the closure (for warnings, diff)
    unbounded: bool | None = None   # legs = "any" (None: as the pack says; DESIGN 4.7)
    role: str = "rule"              # "rule", or "lemma" (an invariant that helps prove rules)


@attrs.frozen
class Pack:
    path: str
    text: str = attrs.field(repr=False)
    sha256: str
    name: str
    title: str
    description: str
    legs: int
    scope: Scope
    params: dict                # name -> (type, Fraction)
    lets: dict                  # name -> Formula
    onboard: dict               # output name -> Formula
    onboard_order: tuple        # evaluation order of the onboard outputs
    q_scale: str
    rounding: str
    trackside: dict
    trackside_order: tuple
    rules: tuple
    warnings: tuple = ()
    unbounded: bool = False     # [pack] legs = "any"
    lemmas: tuple = ()          # Rule objects with role "lemma", in file order
    implementation: dict = attrs.field(factory=dict, hash=False)   # [implementation] (verifier test)
    infos: tuple = ()           # trackside information items ([[info]], DESIGN 4.9)

    def info(self, info_id: str):
        for i in self.infos:
            if i.id == info_id:
                return i
        raise KeyError(info_id)

    def rule(self, rule_id: str) -> Rule:
        """The rule or lemma with this id."""
        for r in self.rules + self.lemmas:
            if r.id == rule_id:
                return r
        raise KeyError(rule_id)

    def definition(self, dep: tuple) -> Formula:
        kind, name = dep
        return {"let": self.lets, "onboard": self.onboard, "trackside": self.trackside}[kind][name]

    def bound_for(self, rule: Rule, override: int | str | None = None) -> int:
        """Bound precedence (DESIGN 3): command line, then the rule, then the pack. For a rule
        checked for any number of legs this is the bound of its base case."""
        if isinstance(override, int):
            return override
        if rule.legs is not None:
            return rule.legs
        return self.legs

    def unbounded_for(self, rule: Rule, override: int | str | None = None) -> bool:
        """Whether the rule is to be proved for any number of legs (DESIGN 4.7): ``--legs any``
        or ``--legs K`` first, then the rule's ``legs``, then the pack's."""
        if override is not None:
            return override == "any"
        if rule.unbounded is not None:
            return rule.unbounded
        return self.unbounded
