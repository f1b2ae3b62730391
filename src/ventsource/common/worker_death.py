"""Worker processes end with the process that started them.

A worker forked by the run keeps the run folder's lock (an inherited file
description), so a worker that outlives a killed parent would hold the folder
for ever. On Linux the kernel's parent-death signal ends it (prctl(2),
PR_SET_PDEATHSIG); elsewhere a worker checks its parent between rows.
"""
import ctypes
import os
import signal
import sys

PR_SET_PDEATHSIG = 1  # linux/prctl.h


def die_with_parent(parent_pid):
    """Pool initializer: arrange for SIGKILL when the parent ends (Linux), and end now
    if the parent is already gone (it may die before prctl takes effect)."""
    if sys.platform.startswith("linux"):
        try:
            libc = ctypes.CDLL(None, use_errno=True)
            libc.prctl(PR_SET_PDEATHSIG, signal.SIGKILL, 0, 0, 0)
        except (OSError, AttributeError):
            pass
    exit_if_orphaned(parent_pid)


def exit_if_orphaned(parent_pid):
    if os.getppid() != parent_pid:
        os._exit(1)
