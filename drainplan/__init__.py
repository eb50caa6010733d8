"""drainplan: design of agricultural subsurface (pipe) drainage.

The design core (``drainplan.spacing``) is re-exported here; it needs only
numpy and scipy. Geometry, pipes, reports and the command line live in their
own modules and load their heavier dependencies when used.
"""

__version__ = "0.1.0"

from .errors import ConvergenceWarning, DrainplanError, GeometryError, InputError  # noqa: E402
from .spacing import *  # noqa: E402,F401,F403
from .spacing import __all__ as _spacing_all  # noqa: E402

__all__ = ["__version__", "DrainplanError", "InputError", "GeometryError",
           "ConvergenceWarning", *_spacing_all]
