"""Cross-cutting helpers every layer may use: error types, the caution text,
numeric limits and thread-count control.

May import: nothing from ventsource.
"""
