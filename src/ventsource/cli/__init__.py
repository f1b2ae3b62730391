"""The `ventsource` command line. Parses options, prints, sets exit codes.

May import: everything.
"""
