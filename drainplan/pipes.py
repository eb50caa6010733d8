"""Compatibility alias: the pipe hydraulics moved to :mod:`drainplan.network.hydraulics`.

Import from there in new code; this alias keeps the public names working for
code written before the move.
"""

from .network.hydraulics import *  # noqa: F401,F403
from .network.hydraulics import __all__  # noqa: F401
