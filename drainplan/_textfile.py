"""Reading a user's text file (project, proposal, weather) with one-line errors."""

from __future__ import annotations

import tomllib
from pathlib import Path

from .errors import InputError

__all__ = ["read_text_file", "read_toml_file"]


def read_text_file(path, *, what, param, encoding="utf-8"):
    """The text of ``path``; a missing or unreadable file is an :class:`InputError`
    naming ``what`` ("project file", "weather file") and the option ``param``."""
    p = Path(path)
    try:
        return p.read_text(encoding=encoding)
    except FileNotFoundError:
        raise InputError(f"{what} not found: {path}", param=param) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read {what} {path}: {exc}", param=param) from None


def read_toml_file(path, *, what, param):
    """The TOML table of ``path``; a TOML error gives its line in one message."""
    text = read_text_file(path, what=what, param=param)
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{Path(path).name}: not valid TOML: {exc}", param=param) from None
