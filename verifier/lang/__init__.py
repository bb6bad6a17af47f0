"""Rule pack front end: TOML loading, the expression grammar and the untyped AST."""
