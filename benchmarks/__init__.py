"""The speed suite. Run ``python -m benchmarks`` for the whole table; every figure is a ratio
against a baseline measured side by side in the same run (never an absolute time checked by a test)."""
