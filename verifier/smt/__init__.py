"""The SMT side: the only package that imports z3."""
