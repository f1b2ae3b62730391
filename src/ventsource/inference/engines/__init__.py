"""Sampling engines, one per module, and their moves (one move per file).

May import: ventsource.common and the rest of ventsource.inference.
"""
