"""Compatibility alias: the network design moved to :mod:`drainplan.network.design`."""

from .network.design import *  # noqa: F401,F403
from .network.design import __all__  # noqa: F401
