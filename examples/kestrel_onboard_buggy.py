"""The Kestrel Quay onboard report with three plausible bugs, for `verifier test` to find.

1. ``cab``: a change of cab is ignored (the orientation is not flipped and the front end is not
   moved to the other cab).
2. ``round``: the doubts are rounded down to the step instead of being widened and rounded up.
3. ``side``: Q_DLRBG is taken from the side of the balise antenna instead of the front end.

``report`` has all three; ``report_cab``, ``report_round`` and ``report_side`` have one each.

    verifier test rules/position-report.toml --impl kestrel_onboard_buggy:report --path examples
"""

from __future__ import annotations

from kestrel_onboard import (NOMINAL, REVERSE, UNKNOWN, _code, direction_of_passage, doubts, encode,
                             estimate)


def _report(obs, bugs: frozenset) -> dict:
    passage = direction_of_passage(obs)
    e = estimate(obs, ignore_cab_changes="cab" in bugs)
    over, under = doubts(obs, e["facing"], e["moves"], e["measured"])
    rounding = "down" if "round" in bugs else "widen"
    if passage is None:
        q, *_ = encode(abs(e["front"]), over, under, rounding)
        return {"q_scale": q, "d_lrbg": 32767, "l_doubtover": 32767, "l_doubtunder": 32767,
                "q_dlrbg": UNKNOWN, "q_dirlrbg": UNKNOWN, "q_dirtrain": UNKNOWN}
    front = passage * e["front"]
    q, d, lo, lu = encode(abs(front), over, under, rounding)
    # bug 3: the antenna is behind the front end, along the orientation
    antenna = front - passage * e["facing"] * obs.antenna
    side = antenna if "side" in bugs else front
    return {"q_scale": q, "d_lrbg": d, "l_doubtover": lo, "l_doubtunder": lu,
            "q_dlrbg": NOMINAL if side >= 0 else REVERSE,
            "q_dirlrbg": _code(passage * e["facing"]), "q_dirtrain": _code(passage * e["moves"][-1]),
            "d_lrbg_m": abs(front), "l_doubtover_m": over, "l_doubtunder_m": under}


def report(obs) -> dict:
    return _report(obs, frozenset({"cab", "round", "side"}))


def report_cab(obs) -> dict:
    return _report(obs, frozenset({"cab"}))


def report_round(obs) -> dict:
    return _report(obs, frozenset({"round"}))


def report_side(obs) -> dict:
    return _report(obs, frozenset({"side"}))
