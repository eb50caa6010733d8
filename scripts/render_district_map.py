"""Render docs/district_spacing.png: the README's map of drain spacing by field for
the invented demo district (runs `drainplan batch` over demo_fields/district).

    python scripts/render_district_map.py
"""

import sys
import tempfile
from pathlib import Path

from drainplan.cli import main

ROOT = Path(__file__).resolve().parents[1]
D = ROOT / "demo_fields" / "district"

if __name__ == "__main__":
    with tempfile.TemporaryDirectory() as tmp:
        rc = main(["-q", "batch", str(D / "fields.geojson"), "--soil", str(D / "soil.geojson"),
                   "--soil-k-column", "k_m_d", "--soil-barrier-column", "barrier_m",
                   "--soil-porosity-column", "porosity", "--project", str(D / "project.toml"),
                   "-o", str(Path(tmp) / "district.gpkg"),
                   "--plot", str(ROOT / "docs" / "district_spacing.png"), "--overwrite"])
    sys.exit(rc)
