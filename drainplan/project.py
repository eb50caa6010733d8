"""Project files: a TOML description of a drainage job, read into plain dataclasses.

Every key is checked: an unknown key is named with the nearest valid one, a
missing required value is named, quantities may carry units as strings
("0.6 m/d", "3/8 in/d", "90 cm") and are converted to SI here, and a
malformed file is reported with its line number. Relative paths are taken
from the project file's folder.
"""

from __future__ import annotations

import difflib
from dataclasses import dataclass, field
from pathlib import Path

from ._validate import QUANTITIES, check_order, check_point, check_quantity
from .errors import InputError
from .units import parse_quantity

__all__ = ["Project", "load_project", "SCHEMA", "TEMPLATES"]

#: Starter project templates shipped in drainplan/templates.
TEMPLATES = {
    "humid-field-crops": "project_humid_field_crops.toml",
    "vegetables": "project_vegetables.toml",
    "irrigated-arid": "project_irrigated_arid.toml",
}

# section -> key -> (kind, required); kinds: text, path, length, rate, time, fraction,
# number, bool, choice:<a|b>, direction, depths, radius, point
SCHEMA = {
    "site": {"name": ("text", True), "client": ("text", False), "location": ("text", False),
             "designer": ("text", False), "date": ("text", False), "notes": ("text", False)},
    "fields": {"file": ("path", True), "layer": ("text", False),
               "id_attribute": ("text", False), "crs": ("text", False),
               "work_crs": ("text", False), "exclusions": ("path", False),
               "exclusions_layer": ("text", False), "exclusion_setback": ("length", False),
               "outlet": ("point", False)},
    "soil": {"k": ("rate", False), "k_above": ("rate", False), "k_below": ("rate", False),
             "interface_depth": ("length", False), "k_vertical": ("rate", False),
             "barrier_depth": ("length", False), "drainable_porosity": ("fraction", False),
             "layers": ("layers", False), "source": ("text", False),
             "tests": ("tests", False), "tests_percentile": ("number", False),
             "k_cv": ("number", False), "drainable_porosity_range": ("range:fraction", False),
             "barrier_depth_range": ("range:length", False)},
    "criteria": {"method": ("choice:hooghoudt|ernst|kirkham|glover-dumm", False),
                 "recharge": ("rate", False), "water_table_depth": ("length", False),
                 "initial_depth": ("length", False), "final_depth": ("length", False),
                 "days": ("time", False),
                 "initial_shape": ("choice:parabolic|flat", False),
                 "flow_depth": ("choice:equivalent|equivalent-plus-half-head", False),
                 "confidence": ("number", False), "source": ("text", False)},
    "drains": {"depth": ("depths", True), "choose_depth": ("choice:deepest|shallowest", False),
               "radius": ("radius", True), "spacing_increment": ("length", False),
               "equivalent_depth": ("choice:series|moody", False)},
    "layout": {"direction": ("direction", False), "setback": ("length", False),
               "min_length": ("length", False), "offset": ("length", False),
               "main_side": ("choice:auto|N|NE|E|SE|S|SW|W|NW", False),
               "cross_setbacks": ("bool", False), "repair": ("bool", False),
               "pattern": ("choice:parallel|herringbone", False),
               "herringbone_angle": ("number", False)},
    "pipes": {"coefficient": ("rate", False),
              "material": ("choice:corrugated|smooth|clay", False),
              "series": ("choice:metric|inch", False),
              "capacity_method": ("choice:manning|power-law", False),
              "capacity_factor": ("number", False), "survey": ("path", False),
              "survey_crs": ("text", False), "survey_z_unit": ("choice:m|ft|cm", False),
              "dem": ("path", False), "main_depth": ("length", False),
              "min_grade": ("fraction", False), "max_grade": ("fraction", False),
              "min_cover": ("length", False), "max_depth": ("length", False),
              "min_velocity": ("number", False), "max_velocity": ("number", False),
              "ditch_water_level": ("length", False), "outfall_margin": ("length", False),
              "sizes": ("path", False), "accept_coefficient_below_peak": ("bool", False),
              "envelope": ("choice:none|sock|gravel", False)},
    "report": {"units": ("choice:metric|us", False), "paper": ("choice:A4|Letter", False),
               "logo": ("path", False)},
    # season simulation over a daily weather record (weather is required in the section)
    "simulation": {"weather": ("path", False), "season": ("text", False),
                   "target_sew30": ("number", False),
                   "target_basis": ("choice:mean|worst-year", False),
                   "model": ("choice:boussinesq|reservoir", False),
                   "latitude": ("number", False), "root_zone_depth": ("length", False)},
}
_REQUIRED_SECTIONS = ("site", "fields", "soil", "drains")

#: (section, key) -> row of the range table (drainplan._validate.QUANTITIES) where the
#: key's own name is not the quantity's name. Every other key whose name is in
#: QUANTITIES is checked against that row, so a new section's keys only need a row.
CHECKED_AS = {("drains", "depth"): "drain_depth", ("drains", "radius"): "drain_radius",
              ("soil", "thickness"): "layer_thickness"}

#: Referenced files: (section, key) -> (what, size limit in bytes, must be an image).
FILE_LIMITS = {("report", "logo"): ("logo", 20 * 2**20, True),
               ("fields", "file"): ("fields", None, False),
               ("fields", "exclusions"): ("exclusions", None, False),
               ("fields", "outlet"): ("outlet", None, False),
               ("pipes", "survey"): ("survey", None, False),
               ("pipes", "dem"): ("DEM", None, False),
               ("pipes", "sizes"): ("pipe sizes", None, False),
               ("simulation", "weather"): ("weather", 200 * 2**20, False)}
_DEFAULT_FILE_LIMIT = 4 * 2**30


def _check_value(section, key, value):
    """Check a converted value (or each of a list) against the one range table."""
    leaf = key.split(".")[-1].split("[")[0]
    q = CHECKED_AS.get((section, leaf), leaf)
    if q not in QUANTITIES or isinstance(value, str):
        return value
    name = f"{section}.{key}"
    if isinstance(value, list):
        for v in value:
            check_quantity(q, v, name=name)
        return value
    return check_quantity(q, value, name=name)


@dataclass
class Project:
    """A project file's content, SI units, paths resolved."""

    path: Path
    site: dict
    fields: dict
    soil: dict
    criteria: dict
    drains: dict
    layout: dict
    pipes: dict
    report: dict
    raw: dict = field(default_factory=dict, repr=False)
    simulation: dict = field(default_factory=dict)

    def input_files(self):
        """Every file the project reads: the project file itself and each referenced
        file (an output folder holding one of them is refused)."""
        files = [self.path]
        for section, keys in SCHEMA.items():
            values = getattr(self, section, {})
            for key, (kind, _) in keys.items():
                v = values.get(key)
                if isinstance(v, str) and (kind == "path" or kind == "point"):
                    files.append(Path(v))
        return files


def _suggest(word, options):
    close = difflib.get_close_matches(word, list(options), n=1, cutoff=0.5)
    return f" (did you mean {close[0]!r}?)" if close else ""


def _check_file(section, key, path):
    """A referenced file must exist, be a regular file of sensible size (an image for
    a logo): checked when the project is read, before any work starts."""
    from .gisio import check_input_file


    what, limit, image = FILE_LIMITS.get((section, key), ("referenced", None, False))
    check_input_file(path, what=f"{section}.{key}: {what}", max_bytes=limit or
                     _DEFAULT_FILE_LIMIT, image=image, param="project")


def _convert(section, key, kind, value, base):
    name = f"{section}.{key}"
    if kind == "text":
        if not isinstance(value, str):
            raise InputError(f"{name} must be text, got {value!r}")
        return value
    if kind == "path":
        if not isinstance(value, str):
            raise InputError(f"{name} must be a file path in quotes, got {value!r}")
        return str((base / value).resolve()) if not Path(value).is_absolute() else value
    if kind == "bool":
        if not isinstance(value, bool):
            raise InputError(f"{name} must be true or false, got {value!r}")
        return value
    if kind == "number":
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise InputError(f"{name} must be a number, got {value!r}")
        return float(value)
    if kind.startswith("choice:"):
        choices = kind.split(":", 1)[1].split("|")
        if value not in choices:
            raise InputError(f"{name} must be one of {', '.join(choices)}; got {value!r}"
                             + _suggest(str(value), choices))
        return value
    if kind == "direction":
        if value == "auto":
            return "auto"
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise InputError(f"{name} must be a bearing in degrees or \"auto\", got {value!r}")
        return check_quantity("direction", value, name=name)
    if kind == "depths":
        values = value if isinstance(value, list) else [value]
        if not values:
            raise InputError(f"{name} needs at least one depth")
        return [parse_quantity(v, "length", name=name) for v in values]
    if kind == "radius":
        from .spacing.drain_radius import drain_radius_table, effective_radius

        names = [r["name"] for r in drain_radius_table()]
        if isinstance(value, str) and value.strip() in names:
            return effective_radius(value.strip())
        return parse_quantity(value, "length", name=name)
    if kind == "layers":
        if not isinstance(value, list) or not value or not all(isinstance(v, dict)
                                                               for v in value):
            raise InputError(f"{name} must be a list of [[soil.layers]] tables")
        allowed = {"name": "text", "thickness": "length", "k": "rate",
                   "drainable_porosity": "fraction"}
        layers = []
        for i, layer in enumerate(value, start=1):
            entry = {}
            for k2, v2 in layer.items():
                if k2 not in allowed:
                    raise InputError(f"unknown key {name}[{i}].{k2}"
                                     + _suggest(k2, allowed))
                entry[k2] = _check_value(section, f"{key}[{i}].{k2}", _convert(
                    section, f"{key}[{i}].{k2}", allowed[k2], v2, base))
            for req in ("thickness", "k"):
                if req not in entry:
                    raise InputError(f"{name}[{i}].{req} is required")
            layers.append(entry)
        return layers
    if kind == "tests":
        from .field_tests import convert_tests

        return convert_tests(value, base, name)
    if kind.startswith("range:"):
        if not isinstance(value, list) or len(value) not in (2, 3):
            raise InputError(f"{name} must be [low, high] or [low, mode, high]")
        return [_convert(section, f"{key}[{i}]", kind.split(":", 1)[1], v, base)
                for i, v in enumerate(value, start=1)]
    if kind == "point":
        if isinstance(value, list) and len(value) == 2 and all(
                isinstance(v, (int, float)) and not isinstance(v, bool) for v in value):
            return check_point(value, name=name)
        if isinstance(value, str):
            return str((base / value).resolve()) if not Path(value).is_absolute() else value
        raise InputError(f"{name} must be [x, y] in the fields' CRS or a point file path")
    return parse_quantity(value, kind, name=name)


def read_project_toml(path):
    """Read a project file's TOML: ``(Path, dict)``, unchecked.

    Raises
    ------
    InputError
        One line: the file is missing or unreadable, or the line of a TOML error.
    """
    from ._textfile import read_toml_file

    return Path(path), read_toml_file(path, what="project file", param="project")


def load_project(path, *, check_files=True):
    """Read and validate a project file.

    Every value is checked against its allowed range (the same table the CLI
    options use) and, with ``check_files``, every referenced file is checked
    (exists, regular file, size, an image for the logo) before any work starts;
    ``check_files=False`` reads a template whose data files are not there yet.

    Raises
    ------
    InputError
        One line naming the file and the key (or the line of a TOML error).
    """
    p, raw = read_project_toml(path)
    base = p.parent.resolve()
    out = {}
    for section, content in raw.items():
        if section not in SCHEMA:
            raise InputError(f"{p.name}: unknown section [{section}]"
                             + _suggest(section, SCHEMA), param="project")
        if not isinstance(content, dict):
            raise InputError(f"{p.name}: {section} must be a [section] of keys",
                             param="project")
    for section, keys in SCHEMA.items():
        content = raw.get(section, {})
        if section in _REQUIRED_SECTIONS and section not in raw:
            raise InputError(f"{p.name}: section [{section}] is required", param="project")
        values = {}
        for key, value in content.items():
            if key not in keys:
                full = [f"{section}.{k}" for k in keys]
                raise InputError(f"{p.name}: unknown key {section}.{key}"
                                 + _suggest(f"{section}.{key}", full), param="project")
            try:
                values[key] = _check_value(section, key,
                                           _convert(section, key, keys[key][0], value, base))
            except InputError as exc:
                raise InputError(f"{p.name}: {exc}", param="project") from None
        for key, (_, required) in keys.items():
            if required and key not in values:
                raise InputError(f"{p.name}: {section}.{key} is required", param="project")
        out[section] = values
    soil = out["soil"]
    try:
        from .field_tests import apply_tests

        apply_tests(soil, out["criteria"])
    except InputError as exc:
        raise InputError(f"{p.name}: {exc}", param="project") from None
    if "layers" in soil:
        clash = [k for k in ("k", "k_above", "k_below") if k in soil]
        if clash:
            raise InputError(f"{p.name}: give soil.layers or soil.{clash[0]}, not both",
                             param="project")
        mus = [ly.get("drainable_porosity") for ly in soil["layers"]]
        if "drainable_porosity" not in soil and any(m is not None for m in mus) and \
                not all(m is not None for m in mus):
            raise InputError(f"{p.name}: soil.layers: give drainable_porosity for every "
                             "layer or for none", param="project")
        if "barrier_depth" not in soil:
            soil["barrier_depth"] = sum(ly["thickness"] for ly in soil["layers"])
    elif "k" not in soil and not ("k_above" in soil and "k_below" in soil):
        raise InputError(f"{p.name}: soil.k (one layer), soil.k_above and soil.k_below (two "
                         "layers), [[soil.layers]] or [[soil.tests]] is required",
                         param="project")
    if "barrier_depth" not in soil:
        raise InputError(f"{p.name}: soil.barrier_depth is required", param="project")
    crit = out["criteria"]
    steady, falling = check_criteria(p.name, crit)
    if falling and "drainable_porosity" not in soil and not (
            "layers" in soil and all("drainable_porosity" in ly for ly in soil["layers"])):
        raise InputError(f"{p.name}: soil.drainable_porosity is required with the falling "
                         "criterion", param="project")
    _cross_checks(p.name, out)
    _check_simulation(p.name, raw, out["simulation"])
    project = Project(path=p, raw=raw, **out)
    if check_files:
        for section, keys in SCHEMA.items():
            for key, (kind, _) in keys.items():
                value = out[section].get(key)
                if kind in ("path", "point") and isinstance(value, str):
                    try:
                        _check_file(section, key, value)
                    except InputError as exc:
                        raise InputError(f"{p.name}: {exc}", param="project") from None
    return project


def check_criteria(fname, crit):
    """Check that [criteria] states a whole steady and/or falling criterion.

    Returns ``(steady, falling)``: which of the two criteria ``crit`` gives.

    Raises
    ------
    InputError
        One line naming the file ``fname`` and the missing key.
    """
    steady = "recharge" in crit or "water_table_depth" in crit
    falling = any(k in crit for k in ("initial_depth", "final_depth", "days"))
    if not steady and not falling:
        raise InputError(f"{fname}: [criteria] needs recharge and water_table_depth "
                         "(steady) or initial_depth, final_depth and days (falling), or both",
                         param="project")
    for group, keys in (("steady", ("recharge", "water_table_depth")),
                        ("falling", ("initial_depth", "final_depth", "days"))):
        given = [k for k in keys if k in crit]
        if given and len(given) != len(keys):
            missing = [k for k in keys if k not in crit]
            raise InputError(f"{fname}: criteria.{missing[0]} is required with the "
                             f"{group} criterion", param="project")
    return steady, falling


def _cross_checks(fname, out):
    """Checks between keys (each key's own range is checked as it is read)."""
    crit, pipes = out["criteria"], out["pipes"]
    pairs = [(crit, "initial_depth", crit, "final_depth", "criteria"),
             (pipes, "min_grade", pipes, "max_grade", "pipes"),
             (pipes, "min_velocity", pipes, "max_velocity", "pipes"),
             (pipes, "min_cover", pipes, "max_depth", "pipes")]
    for lo_sec, lo, hi_sec, hi, section in pairs:
        try:
            check_order(lo, lo_sec.get(lo), hi, hi_sec.get(hi), low_name=f"{section}.{lo}",
                        high_name=f"{section}.{hi}")
        except InputError as exc:
            raise InputError(f"{fname}: {exc}", param="project") from None


def _check_simulation(name, raw, sim):
    """[simulation]: the weather file is required; season, target and latitude checked."""
    if "simulation" not in raw:
        return
    if "weather" not in sim:
        raise InputError(f"{name}: simulation.weather (a daily weather CSV) is required in "
                         "[simulation]", param="project")
    from .weather import parse_season

    try:
        parse_season(sim.get("season"))
    except InputError as exc:
        raise InputError(f"{name}: simulation.{exc}", param="project") from None
    if sim.get("target_sew30") is not None and not sim["target_sew30"] >= 0:
        raise InputError(f"{name}: simulation.target_sew30 must be 0 cm·d or more",
                         param="project")
    lat = sim.get("latitude")
    if lat is not None and not -90 <= lat <= 90:
        raise InputError(f"{name}: simulation.latitude must lie between -90 and 90 degrees",
                         param="project")
    if sim.get("root_zone_depth") is not None and not sim["root_zone_depth"] > 0:
        raise InputError(f"{name}: simulation.root_zone_depth must be greater than 0 m",
                         param="project")
