"""Evidence: counterexample files, and what explains them."""
