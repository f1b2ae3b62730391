"""`ventsource bench` section: inference (to be filled in)."""


def bench_inference(quick=False):
    print("[inference] not implemented yet")
