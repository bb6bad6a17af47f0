"""verifier: proves or refutes safety rules about balise-group-relative train positioning.

Public API (everything else is internal; see :mod:`verifier.api`):

- :func:`load_pack`, :func:`load_all`: read and check rule packs;
- :func:`check_packs`, :func:`check_rule`, :class:`CheckOptions`: verdicts for every rule,
  with their counterexample files;
- :func:`margins`, :class:`MarginOptions`: slack, thresholds and the assumptions each proof
  needs, for the rules of a pack that hold (DESIGN 9);
- :func:`simulate`: the exact simulator on one world;
- the error tree in :mod:`verifier.errors`.
"""

import importlib

from verifier.about import CAUTION, __version__

__all__ = ["CAUTION", "__version__", "load_pack", "load_all", "check_packs", "check_rule",
           "CheckOptions", "RuleResult", "PackResult", "margins", "MarginOptions", "simulate"]

# where each name lives: `import verifier` stays light, and reading or simulating a pack loads
# no solver (tests/test_import_graph.py)
_LAZY = {"load_pack": ("verifier.run.loader", "load_pack"),
         "load_all": ("verifier.run.loader", "load_all"),
         "simulate": ("verifier.world.sim", "State"),
         **{n: ("verifier.api", n) for n in ("check_packs", "check_rule", "CheckOptions",
                                             "RuleResult", "PackResult", "margins",
                                             "MarginOptions")}}


def __getattr__(name):   # PEP 562
    if name in _LAZY:
        module, attr = _LAZY[name]
        return getattr(importlib.import_module(module), attr)
    raise AttributeError(f"module 'verifier' has no attribute {name!r}")
