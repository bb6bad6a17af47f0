"""Static checks: names, types and units, linearity, observability; produces typed packs."""
