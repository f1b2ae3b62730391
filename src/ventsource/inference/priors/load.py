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
    """Read, validate and return the prior in the TOML file at ``path`` (or the shipped prior
    of that name, e.g. "arc_basalt", when no such file exists)."""
    from ventsource.inference.priors.shipped import resolve_prior
    file = resolve_prior(os.fspath(path))
    try:
        with open(file, "rb") as fh:
            raw = fh.read()
        text = raw[3:].decode("utf-8") if raw.startswith(b"\xef\xbb\xbf") else raw.decode("utf-8")  # BOM
        _check_nesting(file, text)  # before tomllib, whose time and memory grow fast with depth
        data = tomllib.loads(text)
    except RecursionError:
        raise PriorFileError(f"{file}: arrays or inline tables nested too deep to read") from None
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
    except ValueError as exc:  # e.g. an integer of more than 4300 digits
        raise PriorFileError(one_line(f"{file}: not readable as TOML ({str(exc)[:80]})")) from None
    return parse_prior(data, file)


MAX_NESTING = 32  # a prior file needs 3 levels; far deeper is an error, not a prior
_TOML_STRINGS = re.compile(r'"""[\s\S]*?"""|\'\'\'[\s\S]*?\'\'\'|"(?:\\.|[^"\\\n])*"|\'[^\'\n]*\'|#[^\n]*')


def _check_nesting(file: str, text: str) -> None:
    """Refuse keys, tables, arrays or inline tables nested deeper than MAX_NESTING, naming the line."""
    bare = _TOML_STRINGS.sub(lambda m: "s" + "\n" * m.group().count("\n"), text)
    depth = 0
    for number, line in enumerate(bare.split("\n"), start=1):
        key = line.split("=", 1)[0] if "=" in line else (line if line.lstrip().startswith("[") else "")
        deepest = key.count(".")
        for ch in line:
            if ch in "[{":
                depth += 1
                deepest = max(deepest, depth)
            elif ch in "]}":
                depth -= 1
        if deepest > MAX_NESTING:
            raise PriorFileError(f"{file}: line {number}, column 1: nested more than {MAX_NESTING} "
                                 "levels deep (keys, tables or arrays)")
