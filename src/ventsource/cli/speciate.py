"""`ventsource speciate`: equilibrium gas at fixed T, P and fO2."""
import json

from ventsource.cli.shared import _check_range, _number, announce_compilation
from ventsource.common.errors import InputError


def add_parser(sub):
    sp = sub.add_parser("speciate", help="equilibrium C-O-H-S gas at fixed T, P and fO2")
    sp.add_argument("--temperature-c", type=_number("--temperature-c"), required=True,
                    help="temperature in degrees Celsius")
    sp.add_argument("--pressure-bar", type=_number("--pressure-bar"), required=True,
                    help="total pressure in bar")
    redox = sp.add_mutually_exclusive_group(required=True)
    redox.add_argument("--dfmq", type=_number("--dfmq"), help="log fO2 offset from FMQ")
    redox.add_argument("--dnno", type=_number("--dnno"), help="log fO2 offset from NNO")
    redox.add_argument("--log-fo2", type=_number("--log-fo2"), help="absolute log10 fO2 (bar)")
    sp.add_argument("--bulk", required=True,
                    help="molar parent-gas composition, e.g. H2O=90,CO2=8,SO2=2")
    sp.add_argument("--eos", choices=["real", "ideal"], default="real",
                    help="gas equation of state: real (fugacity coefficients) or ideal")
    sp.add_argument("--json", action="store_true", help="print one JSON object instead of a table")
    sp.set_defaults(handler=cmd_speciate)


def cmd_speciate(args):
    import numpy as np

    from ventsource.chemistry import buffers
    from ventsource.common import limits
    from ventsource.chemistry.bulk_gas import element_totals, parse_bulk
    from ventsource.chemistry.species import SPECIES
    from ventsource.chemistry.speciation import speciate, STATUS_OK

    _check_range("--temperature-c", args.temperature_c, limits.TEMPERATURE_C, " C")
    announce_compilation()
    _check_range("--pressure-bar", args.pressure_bar, limits.PRESSURE_BAR, " bar")
    t_k = args.temperature_c + 273.15
    p = args.pressure_bar
    if args.dfmq is not None:
        dfmq = args.dfmq
    elif args.dnno is not None:
        dfmq = float(buffers.dfmq_from_dnno(args.dnno, t_k, p))
    else:
        dfmq = float(buffers.dfmq_from_log10_fo2(args.log_fo2, t_k, p))
    _check_range("redox offset dFMQ", dfmq, limits.DFMQ)
    amounts = parse_bulk(args.bulk)
    h, c, s = element_totals(amounts)
    log_fo2 = float(buffers.log10_fo2_from_dfmq(dfmq, t_k, p))
    result = speciate(np.array([t_k]), np.array([p]), np.array([log_fo2]), h, c, s, eos=args.eos)
    if result.status[0] != STATUS_OK:
        raise InputError("speciation did not converge for this state; please report it with "
                         "the command line you used")
    x = result.mole_fractions[0]
    phi = result.fugacity_coefficients[0]
    out = {
        "temperature_c": args.temperature_c,
        "pressure_bar": p,
        "dfmq": dfmq,
        "dnno": float(buffers.dnno_from_dfmq(dfmq, t_k, p)),
        "log_fO2": log_fo2,
        "eos": args.eos,
        "bulk": amounts,
        "species": {name: float(x[i]) for i, name in enumerate(SPECIES)},
        "fugacity_coefficients": {name: float(phi[i]) for i, name in enumerate(SPECIES)},
        "fugacities_bar": {name: float(x[i] * phi[i] * p) for i, name in enumerate(SPECIES)},
        "iterations": int(result.iterations[0]),
    }
    if args.json:
        print(json.dumps(out, indent=2))
        return 0
    print(f"Gas at {args.temperature_c:g} C, {p:g} bar, dFMQ {dfmq:+.2f} "
          f"(log fO2 {log_fo2:.3f}, dNNO {out['dnno']:+.2f}), {args.eos} gas")
    print(f"{'species':<8}{'mole fraction':>16}{'mol %':>10}{'phi':>10}{'fugacity bar':>15}")
    for i in np.argsort(-x):
        name = SPECIES[i]
        print(f"{name:<8}{x[i]:>16.6e}{100 * x[i]:>10.4f}{phi[i]:>10.4f}{x[i] * phi[i] * p:>15.6e}")
    print(f"H2S/SO2 {x[SPECIES.index('H2S')] / x[SPECIES.index('SO2')]:.4g}   "
          f"SO2/CO2 {x[SPECIES.index('SO2')] / x[SPECIES.index('CO2')]:.4g}   "
          f"H2O/CO2 {x[SPECIES.index('H2O')] / x[SPECIES.index('CO2')]:.4g}")
    return 0
