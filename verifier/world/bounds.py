"""The odometer readings and real distances that the scope's reading error bound allows
(DESIGN 4.1), leg by leg: for drawing worlds inside a scope (verifier.trust.strategies) and for
shrinking an implementation's failing world without leaving it (verifier.implcheck.runner)."""

from __future__ import annotations

from fractions import Fraction as F

from verifier.lang.scope import Scope


def odometer_range(scope: Scope, over: F, under: F, measured: F, dist: F) -> tuple[F, F]:
    """The odometer readings of a leg of real length ``dist`` that keep the reading error bound
    (DESIGN 4.1) after this leg, given the errors and the measure ``measured`` so far."""
    ob, ub = scope.odometry_over, scope.odometry_under
    if scope.odometry_basis == "measured":
        hi = (ob.fixed + ob.rate * measured - over + dist) / (1 - ob.rate)
        lo = (under + dist - ub.fixed - ub.rate * measured) / (1 + ub.rate)
    else:
        hi = dist + ob.fixed + ob.rate * (measured + dist) - over
        lo = dist - (ub.fixed + ub.rate * (measured + dist) - under)
    return max(F(0), lo), hi


def distance_range(scope: Scope, over: F, under: F, measured: F, odo: F) -> tuple[F, F]:
    """The real distances compatible with an odometer reading ``odo`` (the converse)."""
    ob, ub = scope.odometry_over, scope.odometry_under
    if scope.odometry_basis == "measured":
        e = measured + odo
        lo = odo - (ob.fixed + ob.rate * e - over)
        hi = odo + (ub.fixed + ub.rate * e - under)
    else:
        lo = (odo + over - ob.fixed - ob.rate * measured) / (1 + ob.rate)
        hi = (ub.fixed + ub.rate * measured - under + odo) / (1 - ub.rate)
    return max(lo, scope.leg_distance[0]), min(hi, scope.leg_distance[1])


def errors_after(scope: Scope, world_legs, detect: F) -> tuple[F, F, F]:
    # the errors the odometry bound carries: with the detection error on top of it (the
    # default, DESIGN 4.1) the legs' errors alone
    over, under, measured = max(F(0), -detect), max(F(0), detect), F(0)
    if not scope.detection_in_odometry:
        over, under = F(0), F(0)
    for leg in world_legs:
        over += max(F(0), leg.odometer - leg.distance)
        under += max(F(0), leg.distance - leg.odometer)
        measured += leg.odometer if scope.odometry_basis == "measured" else leg.distance
    return over, under, measured

