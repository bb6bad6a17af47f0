"""One world under a pack with a user's implementation in place of the pack's designs.

The simulator gives everything the implementation does not compute (the real train, the
onboard's estimate of DESIGN 4.3, the inputs); the implementation's report gives the onboard
outputs and the wire (``est.q_*`` from the qualifier codes, ``est.d_lrbg`` and the doubts from the
unrounded lengths when it returns them, every ``report.*`` and ``rbc.*`` wire value from the
codes); a trackside implementation, when given, gives ``rbc.est_front`` and the safe ends,
otherwise the pack's trackside formulas compute them from the wire.
"""

from __future__ import annotations

from fractions import Fraction

from verifier.implcheck.interface import Placement, Report, direction_of_code
from verifier.lang.vocab import MAX_CODE, Direction
from verifier.world.sim import State

STEP = {0: Fraction(1, 10), 1: Fraction(1), 2: Fraction(10)}   # Q_SCALE codes, SUBSET-026 7.5.1.129
_UNROUNDED = {"est.d_lrbg": "d_lrbg_m", "est.l_doubtover": "l_doubtover_m",
              "est.l_doubtunder": "l_doubtunder_m"}


class NotReturned(KeyError):
    """A rule read an onboard output the implementation does not return."""


class ImplState(State):
    def __init__(self, pack, world, report: Report, placement: Placement | None = None,
                 trackside_given: bool = False):
        super().__init__(pack, world)
        self.report = report
        v = self.values
        step = STEP[report.q_scale]
        for q in ("q_dlrbg", "q_dirlrbg", "q_dirtrain"):
            d = direction_of_code(getattr(report, q))
            v[f"est.{q}"] = d
            v[f"report.{q}"] = d
            v[f"report.code.{q}"] = Fraction(getattr(report, q))
        for name, field in _UNROUNDED.items():
            value = getattr(report, field)
            if value is not None:
                v[name] = value
        codes = []
        for k in ("d_lrbg", "l_doubtover", "l_doubtunder"):
            code = getattr(report, k)
            codes.append(code)
            v[f"report.code.{k}"] = Fraction(code)
            v[f"report.{k}"] = code * step
            v[f"rbc.{k}"] = code * step
        v["report.q_scale"] = step
        v["report.code.q_scale"] = Fraction(report.q_scale)
        v["report.in_range"] = all(c <= MAX_CODE for c in codes)
        v["rbc.placed"] = v["report.in_range"] and all(
            v[f"report.{q}"] is not Direction.UNKNOWN for q in ("q_dlrbg", "q_dirlrbg", "q_dirtrain"))
        if placement is not None:
            for k in ("est_front", "max_safe_front", "min_safe_front", "min_safe_rear"):
                v[f"rbc.{k}"] = getattr(placement, k)
        self.trackside_given = trackside_given

    def get(self, name: str):
        if name in _UNROUNDED and name not in self.values:
            raise NotReturned(f"{name} (the implementation returns no {_UNROUNDED[name]})")
        return super().get(name)

    def formula(self, dep: tuple):
        if dep[0] == "onboard":   # the pack's onboard design is replaced by the implementation
            raise NotReturned(f"est.{dep[1]}")
        return super().formula(dep)

