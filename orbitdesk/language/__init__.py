"""The model language: text -> parsed model with diagnostics (tokenizer, parser, functions, families, sympy trees)."""
