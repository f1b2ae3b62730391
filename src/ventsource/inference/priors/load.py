"""Read a prior file from disk: file and TOML syntax errors as one line."""
from __future__ import annotations

import os
import re
import tomllib

from ventsource.inference.priors.fields import PriorFileError, one_line
from ventsource.inference.priors.parse import parse_prior
from ventsource.inference.priors.spec import PriorSpec

_TOML_POS = re.compile(r"^(?P<msg>.*?)\s*\(at line (?P<line>\d+), column (?P<col>\d+)\)\s*$")
_TOML_EOF = re.compile(r"^(?P<msg>.*?)\s*\(at end of document\)\s*$")


def load_prior_file(path: str | os.PathLike) -> PriorSpec:
    """Read, validate and return the prior in the TOML file at ``path``."""
    file = os.fspath(path)
    try:
        with open(file, "rb") as fh:
            data = tomllib.load(fh)
    except FileNotFoundError:
        raise PriorFileError(f"{file}: file not found") from None
    except IsADirectoryError:
        raise PriorFileError(f"{file}: is a directory, not a prior file") from None
    except PermissionError:
        raise PriorFileError(f"{file}: permission denied") from None
    except UnicodeDecodeError as exc:
        raise PriorFileError(one_line(f"{file}: not UTF-8 text ({exc.reason} at byte {exc.start})")) from None
    except tomllib.TOMLDecodeError as exc:
        text = one_line(str(exc))
        m = _TOML_POS.match(text)
        if m:
            msg = f"{file}: line {m['line']}, column {m['col']}: TOML syntax error: {m['msg']}"
        else:
            m = _TOML_EOF.match(text)
            msg = f"{file}: end of file: TOML syntax error: {m['msg'] if m else text}"
        raise PriorFileError(msg) from None
    return parse_prior(data, file)
