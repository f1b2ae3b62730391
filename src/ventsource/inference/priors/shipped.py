"""Prior files shipped with the package, found by name.

An installed package carries them as the data package ``ventsource.shipped_priors``
(setup.py maps it onto the repository's top-level ``priors/`` folder); a source
checkout used through ``PYTHONPATH=src`` reads that folder directly.

    resolve_prior("arc_basalt")            # -> path of the shipped file
    resolve_prior("my/own_prior.toml")     # -> unchanged
"""
import importlib.resources
import os
import tomllib
from pathlib import Path

DATA_PACKAGE = "ventsource.shipped_priors"


def _checkout_prior_dir():
    """priors/ of the source checkout this module was imported from, or None (installed)."""
    here = Path(__file__).resolve()
    root = here.parents[4]  # src/ventsource/inference/priors/ -> repository root
    if here.parents[3].name == "src" and (root / "pyproject.toml").is_file() and (root / "priors").is_dir():
        return root / "priors"
    return None


def shipped_prior_dir():
    """Folder (a Traversable) holding the shipped prior files, or None when there is none.

    A source checkout reads its own priors/ first: an editable install of another
    checkout (a second git worktree) would otherwise supply that checkout's files."""
    checkout = _checkout_prior_dir()
    if checkout is not None:
        return checkout
    try:
        folder = importlib.resources.files(DATA_PACKAGE)
    except ModuleNotFoundError:
        folder = None
    return folder if folder is not None and folder.is_dir() else None


def shipped_prior_names():
    folder = shipped_prior_dir()
    if folder is None:
        return []
    return sorted(p.name[:-5] for p in folder.iterdir() if p.name.endswith(".toml"))


def shipped_prior_path(name):
    """File-system path of the shipped prior NAME (with or without .toml), or None.

    Installed wheels are unpacked, so each shipped file is a plain file on disk."""
    folder = shipped_prior_dir()
    stem = name[:-5] if name.endswith(".toml") else name
    if folder is None or not stem or os.sep in stem or "/" in stem or stem.startswith("."):
        return None
    path = folder.joinpath(f"{stem}.toml")
    return Path(str(path)) if path.is_file() else None


def resolve_prior(text):
    """A prior given as a file path or as the name of a shipped prior -> a path (str).

    An existing file wins over a shipped name; anything else is returned unchanged so
    that reading it reports the missing file.
    """
    text = os.fspath(text)
    if os.path.exists(text):
        return text
    shipped = shipped_prior_path(text)
    return str(shipped) if shipped is not None else text


def shipped_prior_descriptions():
    """[(name, one-line description)] of every shipped prior, sorted by name."""
    out = []
    for name in shipped_prior_names():
        try:
            with open(shipped_prior_path(name), "rb") as fh:
                meta = tomllib.load(fh).get("metadata", {})
            text = " ".join(str(meta.get("description", "")).split())
        except (OSError, tomllib.TOMLDecodeError):
            text = "(unreadable)"
        out.append((name, text))
    return out
