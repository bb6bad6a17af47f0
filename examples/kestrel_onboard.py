"""A reference onboard position report for the (invented) Kestrel Quay scenario, in plain Python.

Written for `verifier test` as a user would write an implementation: from the observation
alone (docs/implementations.md), with exact fractions, and without any of verifier's own code
(it does not import verifier).

What comes from the standard: L_DOUBTOVER and L_DOUBTUNDER are Q_LOCACC plus an over- and an
under-reading amount, the min safe front end behind the estimate and the max safe front end
ahead of it along the train orientation (SUBSET-026 3.6.4.1.5, 7.5.1.43/44); 32767 is the
special value of the distances and the step is one of the Q_SCALE codes (7.5.1.13, 7.5.1.129).
What comes from this project's design (docs/design.md 4.4), not from a clause: which bound goes
into which doubt when a movement went against the orientation (the direction-aware doubts: an
over-read move against the orientation puts the estimate behind the real front), the odometry
bound of the observation with the detection error on top of it, the automatic step (the finest
at which all three distances fit), a code above 32766 at the step used sent as 32767, and the
rounding (the distance to the nearest step, each doubt widened by that rounding and rounded
up, so the interval never shrinks).

    verifier test rules/position-report.toml --impl kestrel_onboard:report --path examples
"""

from __future__ import annotations

import math
from fractions import Fraction

STEPS = ((0, Fraction(1, 10)), (1, Fraction(1)), (2, Fraction(10)))   # Q_SCALE code, metres
LARGEST = 32766                     # largest distance code; 32767 means unknown
NOMINAL, REVERSE, UNKNOWN = 1, 0, 2  # qualifier codes


def _code(sign: int) -> int:
    return NOMINAL if sign > 0 else REVERSE


def _nearest(x: Fraction, step: Fraction) -> Fraction:
    return math.floor(x / step + Fraction(1, 2)) * step


def _up(x: Fraction, step: Fraction) -> Fraction:
    return math.ceil(x / step) * step


def direction_of_passage(obs) -> int | None:
    """+1 nominal, -1 reverse, None when the group gives no direction."""
    if len(obs.readings) >= 2:
        return 1 if obs.readings[1] > obs.readings[0] else -1
    if obs.linked:
        return 1 if obs.linked_direction == "nominal" else -1
    return None


def estimate(obs, *, ignore_cab_changes: bool = False) -> dict:
    """The front end and the movements in the frame of the passage (positive: the way the train
    moved over the group)."""
    facing = 1 if obs.running == "forward" else -1      # the train's orientation, passage frame
    front = facing * obs.antenna
    moves = [1]                                         # the passage itself moved +1
    measured = Fraction(0)
    for leg in obs.legs:
        if leg.cab_change and not ignore_cab_changes:
            front -= facing * obs.train_length           # the former rear end is the front end
            facing = -facing
        move = facing if leg.running == "forward" else -facing
        front += move * leg.odometer
        moves.append(move)
        measured += leg.odometer
    return {"front": front, "facing": facing, "moves": moves, "measured": measured}


def doubts(obs, facing: int, moves, measured: Fraction) -> tuple:
    """L_DOUBTOVER and L_DOUBTUNDER before rounding: Q_LOCACC plus the over-reading bound where
    a movement went along the orientation (the estimate may then be ahead), the under-reading
    bound where one went against it."""
    (of, orate), (uf, urate) = obs.odometry_over, obs.odometry_under
    bound_over, bound_under = of + orate * measured, uf + urate * measured
    along, against = facing in moves, -facing in moves
    over = obs.locacc + (bound_over if along else 0) + (bound_under if against else 0)
    under = obs.locacc + (bound_under if along else 0) + (bound_over if against else 0)
    return over, under


def encode(d: Fraction, over: Fraction, under: Fraction, rounding: str = "widen", only=None) -> tuple:
    """(Q_SCALE code, D_LRBG, L_DOUBTOVER, L_DOUBTUNDER codes): the finest step at which all
    three fit, else 10 m with the codes that do not fit at 32767."""
    def at(step):
        rd = _nearest(d, step)
        if rounding == "down":
            return rd, math.floor(over / step) * step, math.floor(under / step) * step
        widen = abs(rd - d)
        return rd, _up(over + widen, step), _up(under + widen, step)

    steps = [s for s in STEPS if only is None or s[0] == only]
    for code, step in steps:
        values = at(step)
        if all(0 <= v / step <= LARGEST for v in values):
            return (code, *(int(v / step) for v in values))
    code, step = steps[-1]
    return (code, *(int(v / step) if 0 <= v / step <= LARGEST else 32767 for v in at(step)))


def report(obs, *, q_scale=None) -> dict:
    """The position report of one observation (codes, and the unrounded lengths)."""
    passage = direction_of_passage(obs)
    e = estimate(obs)
    over, under = doubts(obs, e["facing"], e["moves"], e["measured"])
    if passage is None:            # no orientation: no direction can be reported (SUBSET-026 3.6.3.1.4)
        q, *_ = encode(abs(e["front"]), over, under, only=q_scale)
        return {"q_scale": q, "d_lrbg": 32767, "l_doubtover": 32767, "l_doubtunder": 32767,
                "q_dlrbg": UNKNOWN, "q_dirlrbg": UNKNOWN, "q_dirtrain": UNKNOWN}
    front = passage * e["front"]                         # into the LRBG frame
    q, d, lo, lu = encode(abs(front), over, under, only=q_scale)
    return {"q_scale": q, "d_lrbg": d, "l_doubtover": lo, "l_doubtunder": lu,
            "q_dlrbg": NOMINAL if front >= 0 else REVERSE,
            "q_dirlrbg": _code(passage * e["facing"]), "q_dirtrain": _code(passage * e["moves"][-1]),
            "d_lrbg_m": abs(front), "l_doubtover_m": over, "l_doubtunder_m": under}


def report_10cm(obs) -> dict:
    """The same design always at the 10 cm step (as rules/fixed-scale.toml assesses)."""
    return report(obs, q_scale=0)
