"""The scope of a pack: the ranges of the world inputs (DESIGN 4.1, the ``[world]`` table)."""

from __future__ import annotations

from fractions import Fraction

import attrs

from verifier.lang.ast import COUNT, LENGTH, NUMBER
from verifier.lang.numbers import fmt as q

F = Fraction


@attrs.frozen
class Bound:
    """An odometry error bound: ``fixed + rate * E``."""

    fixed: Fraction
    rate: Fraction

    def at(self, measured: Fraction) -> Fraction:
        return self.fixed + self.rate * measured


@attrs.frozen
class Scope:
    balises: tuple = (1, 8)                     # N_TOTAL + 1, SUBSET-026 7.5.1.82
    locacc: tuple = (F(0), F(63))               # Q_LOCACC 0..63 m, SUBSET-026 7.5.1.115
    train_length: tuple = (F(10), F(1000))
    antenna: tuple = (F(2), F(30))              # at least 2 m behind the front, SUBSET-040 4.1.2.2
    leg_distance: tuple = (F(0), F(5000))
    odometry_over: Bound = Bound(F(5), F(1, 20))    # 5 m + 5 %, SUBSET-041 5.3.1.1
    odometry_under: Bound = Bound(F(5), F(1, 20))
    detection: Fraction = F(1)                  # 1 m, SUBSET-036 4.2.10.2
    odometry_basis: str = "measured"            # or "real"
    # whether the odometry bound includes the balise detection error (SUBSET-026 3.6.4.1.1 a
    # names the two as separate parts of the reading amount: by default the detection error
    # is added on top of the odometry bound)
    detection_in_odometry: bool = False
    # a second group (DESIGN 4.8): [world] groups = 2
    groups: int = 1
    g2_distance: tuple = (F(50), F(3000))       # engineered distance from G1's mark to G2's
    g2_side: str = "any"                        # where G2 lies from G1: nominal, reverse or any
    g2_orientation: str = "any"                 # G2's nominal direction against G1's: same, opposite, any
    g2_balises: tuple = (1, 8)
    g2_locacc: tuple = (F(0), F(63))
    # a route of groups (DESIGN 4.10): G3 .. GN ([[group]] tables), and the length of the
    # onboard's list of LRBGs (eight: from memory)
    later: tuple = ()                           # GroupScope of G3, G4, ...
    history: int = 8

    def group(self, k: int) -> "GroupScope":
        """The scope of group ``k`` (2..groups)."""
        if k == 2:
            return GroupScope(self.g2_distance, self.g2_orientation, self.g2_balises, self.g2_locacc)
        return self.later[k - 3]

    def constants(self) -> dict:
        """The ``world.*`` names and their values, with their types."""
        out = {
            "world.balises.low": (COUNT, F(self.balises[0])),
            "world.balises.high": (COUNT, F(self.balises[1])),
            "world.detection": (LENGTH, self.detection),
        }
        for key in ("locacc", "train_length", "antenna", "leg_distance"):
            lo, hi = getattr(self, key)
            out[f"world.{key}.low"] = (LENGTH, lo)
            out[f"world.{key}.high"] = (LENGTH, hi)
        for key in ("odometry_over", "odometry_under"):
            b = getattr(self, key)
            out[f"world.{key}.fixed"] = (LENGTH, b.fixed)
            out[f"world.{key}.rate"] = (NUMBER, b.rate)
        for k in range(2, self.groups + 1):
            g = self.group(k)
            for key in ("distance", "locacc"):
                lo, hi = getattr(g, key)
                out[f"world.g{k}_{key}.low"] = (LENGTH, lo)
                out[f"world.g{k}_{key}.high"] = (LENGTH, hi)
        if self.groups >= 2:
            out["world.history"] = (COUNT, F(self.history))
        return out

    def as_json(self) -> dict:
        """The scope as plain data (for counterexample files and reports)."""
        return {
            "balises": list(self.balises),
            "locacc": [q(x) for x in self.locacc],
            "train_length": [q(x) for x in self.train_length],
            "antenna": [q(x) for x in self.antenna],
            "leg_distance": [q(x) for x in self.leg_distance],
            "odometry_over": {"fixed": q(self.odometry_over.fixed), "rate": q(self.odometry_over.rate)},
            "odometry_under": {"fixed": q(self.odometry_under.fixed), "rate": q(self.odometry_under.rate)},
            "detection": q(self.detection),
            "odometry_basis": self.odometry_basis,
            "detection_in_odometry": self.detection_in_odometry,
            # a one-group scope keeps the form it always had (its files and hashes do not change)
            **({} if self.groups == 1 else {
                "groups": self.groups, "g2_distance": [q(x) for x in self.g2_distance], "g2_side": self.g2_side,
                "g2_orientation": self.g2_orientation, "g2_balises": list(self.g2_balises),
                "g2_locacc": [q(x) for x in self.g2_locacc]}),
            # a route's later groups and a list shorter than eight (a two-group scope keeps its form)
            **({} if not self.later else {"later": [g.as_json() for g in self.later]}),
            **({} if self.history == 8 else {"history": self.history}),
        }


@attrs.frozen
class GroupScope:
    """The ranges of one later group of a route (DESIGN 4.10): its engineered distance from the
    group before it, its orientation against G1, its balises and its Q_LOCACC."""

    distance: tuple = (F(50), F(3000))
    orientation: str = "any"
    balises: tuple = (1, 8)
    locacc: tuple = (F(0), F(63))

    def as_json(self) -> dict:
        return {"distance": [q(x) for x in self.distance], "orientation": self.orientation,
                "balises": list(self.balises), "locacc": [q(x) for x in self.locacc]}


# The [world] bounds a margin may move (``verifier margin --vary KEY``): for each, whether a
# worse real world has a larger ("up") or a smaller ("down") value, the grid its threshold is
# found on, the unit it is written in and how far the search goes. Q_LOCACC is a whole number
# of metres, so its grid is 1 m.
@attrs.frozen
class Vary:
    key: str
    way: str            # "up" or "down"
    grid: Fraction
    unit: str           # "m", "%" (a rate, shown in per cent) or ""
    limit: Fraction     # the search stops here (up) or at 0 (down)


VARY = {v.key: v for v in (
    Vary("odometry_over.rate", "up", F(1, 1000000), "%", F(1)),
    Vary("odometry_over.fixed", "up", F(1, 1000), "m", F(10000)),
    Vary("odometry_under.rate", "up", F(1, 1000000), "%", F(1)),
    Vary("odometry_under.fixed", "up", F(1, 1000), "m", F(10000)),
    Vary("detection", "up", F(1, 1000), "m", F(10000)),
    Vary("locacc.low", "down", F(1), "m", F(0)),
    Vary("locacc.high", "up", F(1), "m", F(10000)),
    Vary("leg_distance.low", "down", F(1, 1000), "m", F(0)),
    Vary("leg_distance.high", "up", F(1, 1000), "m", F(10000000)),
    Vary("train_length.low", "down", F(1, 1000), "m", F(0)),
    Vary("train_length.high", "up", F(1, 1000), "m", F(100000)),
    Vary("antenna.low", "down", F(1, 1000), "m", F(0)),
    Vary("antenna.high", "up", F(1, 1000), "m", F(100000)),
)}
#: What ``--vary`` moves when it is not given (DESIGN 9).
VARY_DEFAULT = ("odometry_over.rate", "odometry_over.fixed", "odometry_under.rate",
                "odometry_under.fixed", "detection", "locacc.low", "locacc.high",
                "leg_distance.low", "leg_distance.high", "train_length.low", "train_length.high")


def bound_of(scope: Scope, key: str) -> Fraction:
    """The value of one [world] bound (a key of :data:`VARY`)."""
    name, _, part = key.partition(".")
    v = getattr(scope, name)
    if isinstance(v, Bound):
        return getattr(v, part)
    if part:
        return v[0 if part == "low" else 1]
    return v


def with_bound(scope: Scope, key: str, value: Fraction) -> Scope:
    """``scope`` with one [world] bound set to ``value``."""
    name, _, part = key.partition(".")
    v = getattr(scope, name)
    if isinstance(v, Bound):
        new = attrs.evolve(v, **{part: value})
    elif part:
        new = (value, v[1]) if part == "low" else (v[0], value)
    else:
        new = value
    return attrs.evolve(scope, **{name: new})
