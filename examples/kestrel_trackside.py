"""A reference trackside placement for the (invented) Kestrel Quay scenario, in plain Python.

From the packet codes alone (SUBSET-026 3.6.4.1.5 and 3.6.1.7): the estimated front end at D_LRBG
on the side Q_DLRBG gives, the max safe front end L_DOUBTUNDER ahead of it along the train
orientation (Q_DIRLRBG), the min safe front end L_DOUBTOVER behind, the min safe rear end one train
length behind that. ``place_swapped`` applies the two doubts the wrong way round.

    verifier test rules/confidence-interval.toml --impl kestrel_onboard:report \\
        --trackside-impl kestrel_trackside:place --path examples
"""

from __future__ import annotations

from fractions import Fraction

STEP = {0: Fraction(1, 10), 1: Fraction(1), 2: Fraction(10)}   # Q_SCALE, SUBSET-026 7.5.1.129


def _place(p, swapped: bool):
    codes = (p.d_lrbg, p.l_doubtover, p.l_doubtunder)
    if any(c == 32767 for c in codes) or 2 in (p.q_dlrbg, p.q_dirlrbg, p.q_dirtrain):
        return None                           # the report does not place the train
    step = STEP[p.q_scale]
    side = 1 if p.q_dlrbg == 1 else -1
    facing = 1 if p.q_dirlrbg == 1 else -1
    est = side * p.d_lrbg * step
    ahead, behind = p.l_doubtunder * step, p.l_doubtover * step
    if swapped:
        ahead, behind = behind, ahead
    min_front = est - facing * behind
    return {"est_front": est, "max_safe_front": est + facing * ahead, "min_safe_front": min_front,
            "min_safe_rear": min_front - facing * p.train_length}


def place(p):
    return _place(p, False)


def place_swapped(p):
    return _place(p, True)
