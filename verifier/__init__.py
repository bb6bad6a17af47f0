"""verifier: proves or refutes safety rules about balise-group-relative train positioning.

Public API (everything else is internal):

- :func:`load_pack`, :func:`load_all`: read and check rule packs;
- :func:`check_packs`, :class:`CheckOptions`: verdicts for every rule;
- :func:`simulate`: the exact simulator on one world;
- the error tree in :mod:`verifier.errors`.
"""

__version__ = "0.1.0"

CAUTION = ("verifier checks rules against a stated model, not against a real train. Its verdicts "
           "support, and never replace, a safety case prepared under EN 50126/50128/50129, local "
           "rules and licensed practice.")


def __getattr__(name):  # lazy, so that `import verifier` stays light and z3-free
    if name in ("load_pack", "load_all"):
        from verifier import loader
        return getattr(loader, name)
    if name in ("check_packs", "CheckOptions", "RuleResult", "PackResult"):
        from verifier import engine
        return getattr(engine, name)
    if name == "simulate":
        from verifier.world.sim import State
        return State
    raise AttributeError(name)
