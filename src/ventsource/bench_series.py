"""`ventsource bench` section: series (to be filled in)."""


def bench_series(quick=False):
    print("[series] not implemented yet")
