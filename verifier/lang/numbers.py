"""Exact numbers as text (shared by files, messages and stories)."""

from __future__ import annotations

from fractions import Fraction


def fmt(x: Fraction) -> str:
    """An exact rational as text: a finite decimal when there is one, else ``p/q``."""
    x = Fraction(x)
    den = x.denominator
    twos = fives = 0
    while den % 2 == 0:
        den //= 2
        twos += 1
    while den % 5 == 0:
        den //= 5
        fives += 1
    if den != 1:
        return f"{x.numerator}/{x.denominator}"
    places = max(twos, fives)
    if places == 0:
        return str(x.numerator)
    scaled = abs(x.numerator) * (10 ** places // x.denominator)
    text = str(scaled).rjust(places + 1, "0")
    out = text[:-places] + "." + text[-places:]
    out = out.rstrip("0").rstrip(".")
    return ("-" if x < 0 else "") + out


def counted(n, one: str, many: str | None = None) -> str:
    """A count with its noun in the right number: "1 leg", "2 legs", "1 balise", "0 balises"."""
    return f"{n} {one if n == 1 else (many or one + 's')}"
