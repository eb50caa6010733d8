"""Read the data files shipped in ``drainplan/templates`` (or an edited copy).

Tables (pipe sizes, Manning's n, effective drain radii), project starters and
the cautions text live there so users can read and adapt them; this is the
one place that opens them.
"""

from __future__ import annotations

import csv
from functools import lru_cache
from importlib import resources

from .errors import InputError

__all__ = ["template_text", "template_rows"]


def template_text(name):
    """Text of ``templates/<name>``."""
    return resources.files("drainplan").joinpath(f"templates/{name}").read_text("utf-8")


@lru_cache(maxsize=16)
def _shipped_rows(name):
    return tuple(tuple(row.items()) for row in csv.DictReader(template_text(name).splitlines()))


def template_rows(name, path=None, *, param=None):
    """Rows (dicts) of the CSV table ``templates/<name>``, or of ``path`` (an edited copy)."""
    if path is None:
        return [dict(row) for row in _shipped_rows(name)]
    try:
        with open(path, newline="", encoding="utf-8") as fh:
            return list(csv.DictReader(fh))
    except OSError as exc:
        raise InputError(f"cannot read {path}: {exc.strerror}", param=param) from None
