"""A shared catalogue of (given, expect, expected verdict) cases, reused by the parser, the
simulator and the encoder tests. Each expected verdict is worked out by hand from DESIGN 4 and
the cited source; the comment beside each case says how. None was produced by the tool.

Every case is checked against a one-rule pack with the default world unless ``world`` or
``onboard`` say otherwise.
"""

from __future__ import annotations

import attrs


@attrs.frozen
class Case:
    id: str
    given: str | None
    expect: str
    verdict: str
    why: str
    legs: int = 2
    world: str = ""     # extra TOML lines for [world]
    onboard: str = ""   # extra TOML lines for [onboard]


CASES = [
    Case("tautology", None, "legs.count >= 0", "holds",
         "legs.count ranges over 0..legs (DESIGN 4.1)"),
    Case("count-bound", None, "legs.count <= 2", "holds", "the bound is 2 legs", legs=2),
    Case("count-bound-exceeded", None, "legs.count <= 1", "violated",
         "a world with 2 legs is in scope; the minimal one has exactly 2 legs", legs=2),
    Case("never-applies", "lrbg.read > lrbg.balises", "false", "vacuous",
         "lrbg.read ranges over 1..balises (DESIGN 4.1)"),
    Case("legs-index-beyond-bound", None, "legs[3].distance >= 0 m", "vacuous",
         "legs[3] implies legs.count >= 3, impossible with a bound of 2 (DESIGN 3.1)", legs=2),
    Case("two-balises-known", "lrbg.read >= 2", "passage.seen == passage.direction", "holds",
         "SUBSET-026 3.4.2.2.2: the reading order gives the direction"),
    Case("one-balise-unknown", "lrbg.read == 1 and not lrbg.linked", "passage.seen == unknown", "holds",
         "SUBSET-026 3.4.2.3.3.1, 3.6.3.1.4.2 (published): a single balise without linking has no co-ordinate system"),
    Case("seen-can-be-unknown", None, "passage.seen != unknown", "violated",
         "a single unlinked balise read is in scope"),
    Case("antenna-behind-front", "passage.running == forward and passage.seen == nominal and legs.count == 0",
         "est.front == train.antenna", "holds",
         "DESIGN 4.3: the estimate starts at o * antenna; SUBSET-040 4.1.2.2 antenna behind the front"),
    Case("rear-first-front-behind", "passage.running == backward and passage.seen == nominal and legs.count == 0",
         "est.front == -train.antenna", "holds",
         "rear first over the group the front faces the other way (DESIGN 4.2)"),
    Case("cab-change-moves-front", "passage.seen == nominal and passage.running == forward and legs.count == 1 "
         "and legs[1].cab_change and legs[1].odometer == 0 m",
         "est.front == train.antenna - train.length", "holds",
         "DESIGN 4.2: a change of cab moves the front by one train length backwards"),
    Case("detection-bound", None, "abs(passage.detect_error) <= 1 m", "holds",
         "SUBSET-036 4.2.10.2 (from memory): 1 m, the default world.detection"),
    Case("detection-bound-tight", None, "abs(passage.detect_error) < 1 m", "violated",
         "the bound is attained: |detect_error| = 1 m is in scope"),
    Case("odometry-bound-1-leg", "legs.count == 1",
         "legs[1].odometer - legs[1].distance <= 5 m + 5 % * legs[1].odometer", "holds",
         "SUBSET-041 5.3.1.1 (from memory): a leg's over-reading <= 5 m + 5 % of the measured distance, the detection error apart"),
    Case("odometry-bound-tight", "legs.count == 1",
         "legs[1].odometer - legs[1].distance < 5 m + 5 % * legs[1].odometer", "violated",
         "the over-reading bound is attained"),
    Case("detection-on-top-of-odometry", "legs.count == 1 and passage.detect_error == -1 m",
         "actual.over_reading <= 5 m + 5 % * est.travelled", "violated",
         "SUBSET-026 3.6.4.1.1 a) (published): odometer accuracy and detection error are two parts of the "
         "reading amount; by default (detection_in_odometry = false) 1 m of detection error comes on top of "
         "a leg over-read by the whole 5 m + 5 %"),
    Case("zero-literal-any-unit", None, "train.length > 0", "holds",
         "the literal 0 adapts to Length (DESIGN 3.1); train length >= 10 m"),
    Case("round-to-ties-up", None, "round_to(0.25 m, 10 cm) == 30 cm", "holds",
         "DESIGN 3.1: floor(x/step + 1/2) * step, ties go up: floor(3) * 0.1 = 0.3"),
    Case("floor-ceil", None, "floor_to(-0.25 m, 10 cm) == -30 cm and ceil_to(-0.25 m, 10 cm) == -20 cm", "holds",
         "floor and ceiling of -2.5 steps"),
    Case("flip-unknown", None, "flip(unknown) == unknown and flip(nominal) == reverse", "holds",
         "DESIGN 3.1: unknown stays"),
    Case("along-reverse", None, "along(reverse, 5 m) == -5 m and along(unknown, 5 m) == 5 m", "holds",
         "DESIGN 3.1"),
    Case("auto-step-fine", "rbc.placed and est.d_lrbg < 100 m and est.l_doubtover < 100 m and est.l_doubtunder < 100 m",
         "report.q_scale == 10 cm and report.code.q_scale == 0", "holds",
         "SUBSET-026 7.5.1.129: 10 cm is code 0; short distances fit at 10 cm"),
    Case("unknown-codes", "passage.seen == unknown",
         "report.code.d_lrbg == 32767 and report.code.l_doubtover == 32767 and report.code.q_dirlrbg == 2", "holds",
         "SUBSET-026 7.5.1.13 (published: 32767 = unknown or greater than 327.660 km; the model sends it for an unknown passage) and 7.5.1.104 (2 unknown)"),
    Case("nearest-rounding-shrinks", "rbc.placed", "rbc.l_doubtover >= est.l_doubtover", "violated",
         "rounding to the nearest step rounds a doubt of x.x4 m down", onboard='rounding = "nearest"'),
    Case("widen-rounding-keeps", "rbc.placed", "rbc.l_doubtover >= est.l_doubtover", "holds",
         "DESIGN 4.4: widen rounds the doubts up"),
    Case("count-quantifier", "legs.count == 2 and legs[1].cab_change and legs[2].cab_change",
         "count(l in legs: l.cab_change) == 2 and cab_changes == 2", "holds", "two cab changes counted"),
    Case("sum-quantifier", None, "sum(l in legs: l.odometer) == est.travelled", "holds",
         "est.travelled is the odometer sum (DESIGN 4.3)"),
    Case("front-inside-interval", "rbc.placed",
         "along(report.q_dirlrbg, actual.front - rbc.min_safe_front) >= 0 m and "
         "along(report.q_dirlrbg, rbc.max_safe_front - actual.front) >= 0 m", "holds",
         "SUBSET-026 3.6.4.1.5 with the direction-aware default doubts (DESIGN 4.4)"),
    Case("front-inside-without-locacc", "rbc.placed",
         "along(report.q_dirlrbg, actual.front - rbc.min_safe_front) >= 0 m", "violated",
         "a doubt without Q_LOCACC misses a real reference mark displaced by the location accuracy",
         onboard='l_doubtover = "est.bound_over + est.bound_under"'),
]
