"""Compatibility alias: the pipes job moved to :mod:`drainplan.network.plan`."""

from .network.plan import *  # noqa: F401,F403
from .network.plan import __all__  # noqa: F401
