"""`ventsource forward`: the forward model for one set of parameters."""
import json
import math

from ventsource.cli.shared import _finite_or_none, _load_prior, announce_compilation
from ventsource.common.errors import InputError


def add_parser(sub):
    fp = sub.add_parser("forward", help="run the forward model for one set of parameters")
    fp.add_argument("--prior", required=True, help="prior file (TOML) or shipped prior name (see `ventsource priors`)")
    fp.add_argument("--set", nargs="+", action="extend", default=[], metavar="NAME=VALUE",
                    help="parameter values, e.g. pressure_bar=200 temperature_c=1100; each name once")
    fp.add_argument("--ratios", default="SO2/CO2,H2S/SO2,H2O/CO2,CO2/ST,H2/H2O,CO/CO2",
                    help="comma-separated gas ratios to print (molar)")
    fp.add_argument("--json", action="store_true", help="print one JSON object instead of text")
    fp.set_defaults(handler=cmd_forward)


def cmd_forward(args):
    import numpy as np

    from ventsource import ForwardModel

    spec = _load_prior(args.prior)
    announce_compilation()
    values = _set_values(args, spec)
    theta = _forward_theta(args, spec, values)
    ratio_names = tuple(r.strip() for r in args.ratios.split(",") if r.strip())
    model = ForwardModel(spec, ratio_names)
    state = model.state(np.array([theta]))
    status = int(state["status"][0])
    label = {0: "gas", 1: "no gas: the magma is undersaturated at this pressure",
             2: "solver failure", 3: "zero prior mass: D_S x S >= 1 (the first gas would be more "
             "than all the sulfur)"}[status]
    out = _forward_summary(args, spec, theta, state, ratio_names, label)
    if args.json:
        print(json.dumps(out, indent=2))
        return 0
    _print_forward(args, out, label, status, state["gas"][0])
    return 0


def _set_values(args, spec):
    """--set NAME=VALUE items -> {name: value}, each a known parameter in its physical range."""
    from ventsource.forward.model import UNITS
    from ventsource.inference.priors import PHYSICAL_LIMITS
    values = {}
    for item in args.set:
        if "=" not in item:
            raise InputError(f"--set: '{item}' is not NAME=VALUE")
        name, text = item.split("=", 1)
        if name in values:
            raise InputError(f"--set: {name} is given twice; give each parameter once")
        if name not in spec.parameter_names:
            raise InputError(f"--set: unknown parameter '{name}' for {args.prior} "
                             f"(parameters: {', '.join(spec.parameter_names)})")
        try:
            value = float(text)
        except ValueError:
            raise InputError(f"--set: {name} value '{text}' is not a number") from None
        lo, hi, lo_open, hi_open = PHYSICAL_LIMITS[name]
        if not math.isfinite(value) or value < lo or value > hi or (lo_open and value == lo) \
                or (hi_open and value == hi):
            raise InputError(f"--set: {name}={text} is unphysical or outside the supported range "
                             f"{lo:g} to {hi:g} ({UNITS.get(name, '')})")
        values[name] = value
    return values


def _forward_theta(args, spec, values):
    """Full parameter vector: the --set values, else the prior's fixed values."""
    fixed = getattr(spec, "fixed_values", {}) or {}
    theta = []
    for name in spec.parameter_names:
        if name in values:
            theta.append(values[name])
        elif name in fixed:
            theta.append(float(fixed[name]))
        else:
            raise InputError(f"--set: missing {name}; every free parameter of {args.prior} needs a "
                             f"value ({', '.join(n for n in spec.free_names if n not in values)})")
    return theta


def _forward_summary(args, spec, theta, state, ratio_names, label):
    """The `forward` command's JSON object (NaN and inf as null)."""
    from ventsource.chemistry.species import SPECIES
    gas = state["gas"][0]
    return {
        "prior": args.prior,
        "parameters": dict(zip(spec.parameter_names, theta)),
        "status": label,
        "saturation_pressure_bar": _finite_or_none(state["saturation_pressure_bar"][0]),
        "open_path_started_at_cap": bool(state["closed_above_cap"][0]),
        "gas_wt_fraction": float(state["gas_wt_fraction"][0]),
        "gas": {n: _finite_or_none(gas[i]) for i, n in enumerate(SPECIES)},
        "magmatic_gas": {n: _finite_or_none(state["magmatic_gas"][0][i]) for i, n in enumerate(SPECIES)},
        "deep_gas": {n: _finite_or_none(state["deep_gas"][0][i]) for i, n in enumerate(SPECIES)},
        "melt": {"h2o_wt": float(state["melt_h2o_wt"][0]), "co2_ppm": float(state["melt_co2_ppm"][0]),
                 "s_ppm": float(state["melt_s_ppm"][0])},
        "ratios": {r: _finite_or_none(state["ratios"][0][k]) for k, r in enumerate(ratio_names)},
        "models": dict(spec.models),
        **_redox_summary(spec, theta, state),
    }


def _redox_summary(spec, theta, state):
    """dFMQ at P, the sulfur phase, and the melt's redox path (workflow/redox_path.py)."""
    from ventsource.forward.model import ForwardModel
    from ventsource.workflow.redox_path import PHASE_NAMES, redox_path
    d = state["dfmq_at_pressure"][0]
    return {"dfmq_at_pressure": _finite_or_none(d),
            "sulfur_phase": PHASE_NAMES.get(int(state["sulfur_phase"][0]), "none"),
            "redox_path": redox_path(ForwardModel(spec), theta, float(state["saturation_pressure_bar"][0]))}


def _print_forward(args, out, label, status, gas):
    from ventsource.chemistry.species import SPECIES
    print(f"Forward model, prior {args.prior}")
    print("  " + ", ".join(f"{k}={v:g}" for k, v in out["parameters"].items()))
    print(f"  status: {label}")
    psat = out["saturation_pressure_bar"]
    print(f"  saturation pressure: {psat:.1f} bar" if psat is not None else
          "  saturation pressure: above the model's 20 kbar search cap")
    if out["open_path_started_at_cap"]:
        print("  open-system path started at the 20 kbar cap (gas deeper than the cap stays with its magma)")
    if status == 0:
        print(f"  gas mass fraction: {out['gas_wt_fraction']:.4g}")
        print(f"  melt: H2O {out['melt']['h2o_wt']:.3f} wt%, CO2 {out['melt']['co2_ppm']:.1f} ppm, "
              f"S {out['melt']['s_ppm']:.1f} ppm")
        print("  gas after scrubbing (mol %): " + ", ".join(
            f"{n} {100 * gas[i]:.4g}" for i, n in enumerate(SPECIES) if gas[i] > 1e-6))
        print("  ratios: " + ", ".join(f"{r} {v:.4g}" for r, v in out["ratios"].items()))
        print(f"  melt dFMQ at this pressure: {out['dfmq_at_pressure']:+.3f} "
              f"(redox {out['models'].get('redox', 'buffered')}); sulfur phase: {out['sulfur_phase']}")
    print("  redox path (P bar: dFMQ, Fe3+/Fe): " + "; ".join(
        f"{q['pressure_bar']:.4g}: {q['dfmq']:+.2f}, {q['fe3_fraction']:.3f}" for q in out["redox_path"]))
