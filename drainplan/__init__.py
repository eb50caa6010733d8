"""drainplan: design of agricultural subsurface (pipe) drainage.

The design core (``drainplan.spacing``) is re-exported here: ``import drainplan
as dp; dp.hooghoudt_spacing(...)``. It is loaded on first use (module
``__getattr__``), so ``import drainplan`` itself, and with it ``drainplan
--help``, loads neither numpy nor scipy. Geometry, pipes, reports and the
command line live in their own modules and load their heavier dependencies
when used.
"""

__version__ = "0.1.0"

from .errors import ConvergenceWarning, DrainplanError, GeometryError, InputError  # noqa: E402

#: Names re-exported from :mod:`drainplan.spacing` (its ``__all__``; a test
#: checks that the two lists agree).
_CORE = (
    "METHODS", "STEADY_METHODS", "SpacingResult", "drain_spacing", "check_spacing",
    "EQUIVALENT_DEPTH_METHODS", "equivalent_depth", "equivalent_depth_deep_limit",
    "molen_wesseling_f",
    "hooghoudt_spacing", "hooghoudt_head", "hooghoudt_recharge", "hooghoudt_water_table",
    "kirkham_f", "kirkham_head", "kirkham_spacing",
    "ERNST_GEOMETRY_TABLE", "ernst_geometry_factor", "ernst_head", "ernst_layer_caution",
    "ernst_spacing",
    "ernst_profile_spacing", "ernst_profile_terms",
    "FLOW_DEPTHS", "INITIAL_SHAPES", "glover_dumm_flow_depth", "glover_dumm_head",
    "glover_dumm_profile",
    "glover_dumm_spacing", "reaction_factor",
    "drain_radius_table", "effective_radius", "ditch_radius", "square_envelope_radius",
    "SimulationResult", "boussinesq_simulation", "de_zeeuw_hellinga_simulation",
    "de_zeeuw_hellinga_reaction_factor", "et_reduction_factor", "sew30",
)

__all__ = ["__version__", "DrainplanError", "InputError", "GeometryError",
           "ConvergenceWarning", *_CORE]


def __getattr__(name):
    """Load the design core on first use of one of its names."""
    if name in _CORE:
        from . import spacing

        value = getattr(spacing, name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'drainplan' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(_CORE))
