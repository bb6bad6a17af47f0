"""The world model: vocabulary, scope and the exact simulator (no z3 here)."""
