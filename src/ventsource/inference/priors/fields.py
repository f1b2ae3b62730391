"""Typed readers for the fields of a prior file; every problem becomes a
one-line PriorFileError naming the file and the key."""
from __future__ import annotations

import math
from typing import Any, Mapping


class PriorFileError(Exception):
    """A prior file could not be read or is invalid. The message is one line."""


def one_line(text: str) -> str:
    return " ".join(str(text).split())


def key_error(file: str, key: str, what: str) -> PriorFileError:
    return PriorFileError(one_line(f"{file}: key '{key}': {what}"))


def type_name(value: Any) -> str:
    if isinstance(value, bool):
        return "boolean"
    if isinstance(value, (int, float)):
        return "number"
    if isinstance(value, str):
        return "string"
    if isinstance(value, dict):
        return "table"
    if isinstance(value, list):
        return "array"
    return type(value).__name__


def read_table(file: str, data: Mapping, key: str, keypath: str, required: bool) -> dict | None:
    if key not in data:
        if required:
            raise key_error(file, keypath, "missing required table")
        return None
    value = data[key]
    if not isinstance(value, dict):
        raise key_error(file, keypath, f"must be a table, got {type_name(value)}")
    return value


def read_number(file: str, table: Mapping, key: str, keypath: str, required: bool,
            default: float | None = None) -> float | None:
    if key not in table:
        if required:
            raise key_error(file, keypath, "missing required key")
        return default
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise key_error(file, keypath, f"must be a number, got {type_name(value)} {value!r}")
    try:
        value = float(value)
    except OverflowError:  # an integer beyond the float range (about 1.8e308)
        raise key_error(file, keypath, f"number too large ({value.bit_length()}-bit integer)") from None
    if not math.isfinite(value):
        raise key_error(file, keypath, f"must be finite, got {value}")
    return value


def read_string(file: str, table: Mapping, key: str, keypath: str, required: bool,
            default: str | None = None) -> str | None:
    if key not in table:
        if required:
            raise key_error(file, keypath, "missing required key")
        return default
    value = table[key]
    if not isinstance(value, str):
        raise key_error(file, keypath, f"must be a string, got {type_name(value)} {value!r}")
    if not value.strip():
        raise key_error(file, keypath, "must not be empty")
    return value


def read_boolean(file: str, table: Mapping, key: str, keypath: str, default: bool) -> bool:
    if key not in table:
        return default
    value = table[key]
    if not isinstance(value, bool):
        raise key_error(file, keypath, f"must be true or false, got {type_name(value)} {value!r}")
    return value


def reject_unknown_keys(file: str, table: Mapping, allowed, prefix: str, what: str = "") -> None:
    for key in table:
        if key not in allowed:
            where = f"{prefix}.{key}" if prefix else str(key)
            extra = f" {what}" if what else ""
            raise key_error(file, where, f"unknown key{extra} (allowed: {', '.join(allowed)})")


def fmt_number(x: float) -> str:
    return f"{x:g}"
