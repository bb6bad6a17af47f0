"""What the tool is and the caution every output carries (the bottom layer: imports nothing)."""

__version__ = "0.1.0"

CAUTION = ("verifier checks rules against a stated model, not against a real train. Its verdicts "
           "support, and never replace, a safety case prepared under EN 50126/50128/50129, local "
           "rules and licensed practice.")
