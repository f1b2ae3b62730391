"""Benchmarks behind `ventsource bench`: speeds as ratios to a reference
measured in the same process (CPU seconds).

May import: every layer but the CLI.
"""
