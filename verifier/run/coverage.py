"""What a pack's verdicts cover: the scope every verdict of the pack rests on, as plain data and
as a few lines of text that fit a 100-column terminal.

Every output that prints a verdict prints this too (the table, ``--json``, the HTML report,
SARIF, JUnit, ``verifier test``): the leg bound or "any number of legs" (with the base case and
the induction depth), the ``[world]`` ranges in force, the onboard and trackside designs (the
defaults or the pack's own formulas), and the rules whose own ``legs`` or a ``--legs`` override
change the bound. The data is computed from the typed pack and the options alone.
"""

from __future__ import annotations

import textwrap

from verifier.check.model import Pack
from verifier.lang.vocab import DEFAULT_INFO_ONE, DEFAULT_INFO_TWO

WIDTH = 98


def _legs(n) -> str:
    return f"{n} leg{'s' if n != 1 else ''}"


def summary(pack: Pack, legs=None, induction_depth: int = 4, rules=None, tested=None,
            max_legs: int | None = None) -> dict:
    """The scope of ``pack``'s verdicts under ``--legs`` ``legs`` and ``--induction-depth``
    (plain data; ``rules``: the rules and lemmas checked, default all; ``max_legs``: how far the
    base case of a rule whose step is not proved is deepened, ``--max-legs``). ``tested``: for
    ``verifier test``, the legs of the worlds tried ({"generated_legs", "solver_legs"})."""
    rules = list(pack.lemmas + pack.rules) if rules is None else list(rules)
    unbounded = pack.unbounded if legs is None else legs == "any"
    bound = legs if isinstance(legs, int) else pack.legs
    out = {"legs": "any" if unbounded else bound}
    if tested is not None:
        out["tested"] = dict(tested)
    if unbounded:
        out["base_legs"] = max(bound, induction_depth - 1)
        out["induction_depth"] = induction_depth
        if max_legs is not None:
            out["max_legs"] = max_legs
    if legs is not None:
        out["legs_option"] = str(legs)
    own = {}
    for r in rules:
        if legs is not None:
            break                          # --legs overrides every rule's own bound
        if r.unbounded is not None and r.unbounded != pack.unbounded:
            own[r.id] = "any" if r.unbounded else (r.legs if r.legs is not None else pack.legs)
        elif r.legs is not None and r.legs != pack.legs:
            own[r.id] = r.legs
    if own:
        out["rule_bounds"] = own
    out["world"] = pack.scope.as_json()
    out["groups"] = pack.scope.groups
    out["information_items"] = len(pack.infos)
    item_defaults = DEFAULT_INFO_TWO if pack.scope.groups >= 2 else DEFAULT_INFO_ONE
    out["onboard"] = {
        "q_scale": pack.q_scale, "rounding": pack.rounding,
        "own_formulas": sorted(k for k, f in pack.onboard.items()
                               if not f.default and not (k in item_defaults and not pack.infos))}
    out["trackside"] = {"own_formulas": sorted(k for k, f in pack.trackside.items() if not f.default)}
    return out


def _range(pair, unit=" m") -> str:
    lo, hi = pair
    return f"{lo}{unit}" if lo == hi else f"{lo}..{hi}{unit}"


def _design(part: dict) -> str:
    own = part["own_formulas"]
    return "the default design" if not own else f"the pack's {', '.join(own)} (defaults elsewhere)"


def parts(scope: dict) -> list[tuple[str, str]]:
    """The scope in words: (label, text) pairs."""
    if scope["legs"] == "any":
        legs = (f"any number of legs (k-induction: base case up to {_legs(scope['base_legs'])}, "
                f"step depth 1..{scope['induction_depth']}"
                + (f"; a rule whose step fails is checked on up to {_legs(scope['max_legs'])}"
                   if scope.get("max_legs", 0) > scope["base_legs"] else "") + ")")
    else:
        legs = f"up to {_legs(scope['legs'])}"
    if "tested" in scope:        # verifier test: worlds tried, not a proof
        t = scope["tested"]
        legs = (f"worlds of up to {_legs(t['generated_legs'])} (generated), solver worlds up to "
                f"{_legs(t['solver_legs'])}; a test in these worlds, not a proof")
    if "legs_option" in scope:
        legs += f" (--legs {scope['legs_option']})"
    w = scope["world"]
    groups = scope["groups"]
    world = (f"train {_range(w['train_length'])}, antenna {_range(w['antenna'])} behind the front, "
             f"each leg {_range(w['leg_distance'])}, {_range(w['balises'], '')} balises, "
             f"Q_LOCACC {_range(w['locacc'])}")
    if groups >= 2:
        world += (f"; G2 at {_range(w['g2_distance'])} ({w['g2_side']} side, orientation "
                  f"{w['g2_orientation']}), {_range(w['g2_balises'], '')} balises, "
                  f"Q_LOCACC {_range(w['g2_locacc'])}")
    for k, g in enumerate(w.get("later", []), 3):      # a route (DESIGN 4.10)
        world += (f"; G{k} {_range(g['distance'])} on from G{k - 1} (orientation {g['orientation']}), "
                  f"{_range(g['balises'], '')} balises, Q_LOCACC {_range(g['locacc'])}")
    if groups >= 2:
        world += f"; the onboard remembers the last {w.get('history', 8)} LRBGs"
    o, u = w["odometry_over"], w["odometry_under"]
    o, u = w["odometry_over"], w["odometry_under"]
    odo = (f"over-reading {o['fixed']} m + {_pct(o['rate'])}, under-reading {u['fixed']} m + "
           f"{_pct(u['rate'])} of the {w['odometry_basis']} distance; detection error {w['detection']} m"
           + (" counted inside those bounds" if w.get("detection_in_odometry") else " on top of them"))
    designs = (f"onboard: {_design(scope['onboard'])}, Q_SCALE {scope['onboard']['q_scale']}, "
               f"rounding {scope['onboard']['rounding']}; trackside: {_design(scope['trackside'])}")
    if "tested" in scope:
        t = scope["tested"]
        designs = (f"onboard: the implementation {t['onboard']}; trackside: "
                   + (f"the implementation {t['trackside']}" if t.get("trackside")
                      else _design(scope["trackside"])))
    items = scope["information_items"]
    out = [("scope", f"{legs}; {groups} group{'s' if groups != 1 else ''}"
              + (f", {items} information item{'s' if items != 1 else ''}" if items else "")),
             ("world", world), ("odometry", odo), ("designs", designs)]
    if scope.get("rule_bounds"):
        out.append(("own bound", ", ".join(
            f"{k} ({'any number of legs' if v == 'any' else 'up to ' + _legs(v)})"
            for k, v in sorted(scope["rule_bounds"].items()))))
    return out


def lines(scope: dict, width: int = WIDTH, indent: str = "  ") -> list[str]:
    """The scope as text: a compact block of lines, none wider than ``width``."""
    out = []
    for label, text in parts(scope):
        out += textwrap.wrap(text, width=width, initial_indent=f"{indent}{label:<10}",
                             subsequent_indent=indent + " " * 10, break_on_hyphens=False)
    return out


def _pct(rate: str) -> str:
    from fractions import Fraction
    value = Fraction(rate) * 100
    return (f"{value.numerator}" if value.denominator == 1 else f"{float(value):g}") + " %"


def one_line(scope: dict) -> str:
    """The scope in one line (for result properties and short headers)."""
    return "; ".join(f"{label}: {text}" for label, text in parts(scope))
