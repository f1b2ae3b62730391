"""ventsource: Bayesian inversion of volcanic gas ratios.

The public Python interface (``__all__``); everything else is internal:

* ``Measurement``: one row of gas ratios with relative 1-sigma and limits;
* ``load_prior``: a prior file or a shipped prior by name;
* ``read_measurements``: a measurement CSV, checked;
* ``infer``: one measurement; ``infer_window``: rows that share one magma source;
* ``run``: a series into a run folder; ``compare``: the same data under several priors;
* ``ForwardModel``: parameters in, gas ratios out;
* ``plan``: which added measurement would sharpen the answer most.

Results are model- and prior-dependent; they support, and never replace, the
responsible observatory's assessment. The names load on first use, so that
``import ventsource`` stays light (the command line sets its thread limits before
NumPy loads).

>>> import ventsource as vs
>>> sorted(vs.__all__)[:3]
['ForwardModel', 'Measurement', 'compare']
"""

__version__ = "0.5.1"

__all__ = ["Measurement", "load_prior", "read_measurements", "infer", "infer_window", "run",
           "compare", "ForwardModel", "plan"]

# public name -> module of ventsource.api that holds it
_HOMES = {"Measurement": "inputs", "load_prior": "inputs", "read_measurements": "inputs",
          "infer": "inversion", "infer_window": "inversion", "run": "runs", "compare": "runs",
          "ForwardModel": "model", "plan": "planning"}


def __getattr__(name):
    if name in _HOMES:
        import importlib
        value = getattr(importlib.import_module(f"ventsource.api.{_HOMES[name]}"), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'ventsource' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(__all__))
