"""Re-checking after a change: two versions of a pack compared (diff), archived counterexamples
replayed against today's rules (replay)."""
