"""The run stage: loading packs, the engine (solve, replay, compare), the induction driver,
the cache and parallel solving; what a set of verdicts covers."""
