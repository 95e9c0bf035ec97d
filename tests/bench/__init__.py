"""Benchmarks: every speed goal measured as a same-run ratio against a reference.

Run ``python -m tests.bench`` (or ``make bench``; ``--quick`` / ``QUICK=1`` for a short run).
Benchmarks are not tests: nothing here fails on a slow machine. ``tests/test_bench_smoke.py``
only proves the module runs and writes every row.
"""
