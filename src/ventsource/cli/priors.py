"""`ventsource priors`: the shipped prior files."""
from ventsource.common.errors import InputError


def add_parser(sub):
    lp = sub.add_parser("priors", help="list the shipped prior files (usable by name: --prior NAME)")
    lp.set_defaults(handler=cmd_priors)


def cmd_priors(args):
    from ventsource.inference.priors.shipped import shipped_prior_descriptions
    entries = shipped_prior_descriptions()
    if not entries:
        raise InputError("no shipped prior files found in this installation")
    width = max(len(name) for name, _ in entries)
    for name, text in entries:
        print(f"{name:<{width}}  {text}")
    return 0
