"""Benchmarks of the Mapper engine: ``python -m tests.benchmarks.run`` (``make bench``)."""
