"""Checks of the checker: differential testing of the simulator against the encoding, the
cvc5 cross-check, mutants, fuzzed input and the validation dossier (selftest)."""
