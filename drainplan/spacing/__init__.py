"""Design core: drain-spacing methods as plain functions on numpy arrays (SI: m, d)."""

from .drain_radius import (drain_radius_table, ditch_radius, effective_radius,
                           square_envelope_radius)
from .drain_spacing import (METHODS, STEADY_METHODS, SpacingResult, check_spacing,
                            drain_spacing)
from .equivalent_depth import (EQUIVALENT_DEPTH_METHODS, equivalent_depth,
                               equivalent_depth_deep_limit, molen_wesseling_f)
from .ernst import (ERNST_GEOMETRY_TABLE, ernst_geometry_factor, ernst_head,
                    ernst_layer_caution, ernst_profile_spacing, ernst_profile_terms,
                    ernst_spacing)
from .glover_dumm import (FLOW_DEPTHS, INITIAL_SHAPES, glover_dumm_flow_depth,
                          glover_dumm_head, glover_dumm_profile, glover_dumm_spacing,
                          reaction_factor)
from .hooghoudt import (hooghoudt_head, hooghoudt_recharge, hooghoudt_spacing,
                        hooghoudt_water_table)
from .kirkham import kirkham_f, kirkham_head, kirkham_spacing
from .reservoir import de_zeeuw_hellinga_reaction_factor, de_zeeuw_hellinga_simulation
from .simulation import SimulationResult, boussinesq_simulation, et_reduction_factor, sew30

__all__ = [
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
]
