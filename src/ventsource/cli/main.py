"""Command line: `ventsource <command> ...`; each command is a module of this package
(its parser and its handler), listed in COMMANDS.

Every user error is printed as one line on stderr with exit status 2.
"""
import argparse
import sys

from ventsource import __version__
from ventsource.cli import (bench, compare, demo, forward, plan, prior_predictive, priors, ratios_command, run,
                            speciate, watch)
from ventsource.common.errors import InputError

EXIT_USAGE = 2
COMMANDS = (speciate, forward, prior_predictive, run, compare, demo, priors, bench, ratios_command, plan, watch)


class _HelpFormatter(argparse.ArgumentDefaultsHelpFormatter):
    """Shows '(default: X)' where a default is used as is; None and flags say nothing."""

    def _get_help_string(self, action):
        text = action.help or ""
        d = action.default
        if d is None or d is False or d is argparse.SUPPRESS or d == [] or "default" in text \
                or isinstance(action, argparse._VersionAction):
            return text
        return text + " (default: %(default)s)"


class _Parser(argparse.ArgumentParser):
    def __init__(self, *args, **kwargs):
        kwargs.setdefault("formatter_class", _HelpFormatter)
        super().__init__(*args, **kwargs)

    def error(self, message):  # one line instead of argparse's usage block
        raise InputError(f"{self.prog}: {message}")


def build_parser():
    parser = _Parser(prog="ventsource",
                     description="Bayesian inversion of volcanic gas ratios.")
    parser.add_argument("--version", action="version", version=f"ventsource {__version__}")
    sub = parser.add_subparsers(dest="command", parser_class=_Parser)
    for command in COMMANDS:  # one module per command, in the order of the help text
        command.add_parser(sub)
    return parser


def _resolve_prior_args(args):
    """--prior NAME of a shipped prior -> its path, wherever a prior file path is accepted."""
    from ventsource.inference.priors.shipped import resolve_prior
    prior = getattr(args, "prior", None)
    if isinstance(prior, list):
        args.prior = [resolve_prior(p) for p in prior]
    elif prior is not None:
        args.prior = resolve_prior(prior)


def main(argv=None):
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
        if not getattr(args, "handler", None):
            parser.print_help()
            return EXIT_USAGE
        if args.command in ("run", "compare", "demo", "bench", "plan", "watch"):
            from ventsource.common.threads import single_thread_environment
            single_thread_environment()  # before NumPy loads (the prior lookup loads it)
        _resolve_prior_args(args)
        return args.handler(args)
    except InputError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except OSError as exc:  # a write the run could not make (disk full, read-only folder...)
        where = f"{exc.filename}: " if exc.filename else ""
        print(f"error: {where}cannot read or write ({exc.strerror or exc})", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
