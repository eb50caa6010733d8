"""Render the compliance map of the demo proposal check to docs/check_map.png.

Checks the invented contractor's proposal (demo_fields/proposal.toml) against the
demo project and draws the map the check sheet shows, small enough for the README.

    python scripts/render_check_map.py
"""

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

from drainplan.check import check_proposal, read_proposal  # noqa: E402
from drainplan.check_sheet import compliance_map  # noqa: E402
from drainplan.plots import save_figure  # noqa: E402
from drainplan.project import load_project  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]


def main():
    project = load_project(ROOT / "demo_fields" / "project.toml")
    result = check_proposal(project, read_proposal(ROOT / "demo_fields" / "proposal.toml"))
    fig, ax = plt.subplots(figsize=(7.5, 4.6))
    s = result.summary
    compliance_map(result, ax=ax, title=f"Invented proposal: {s['area_meeting_pct']:.0f} % of "
                                        "the drained area meets every criterion")
    fig.tight_layout()
    target = ROOT / "docs" / "check_map.png"
    target.parent.mkdir(exist_ok=True)
    save_figure(fig, target, dpi=72)
    print(f"wrote {target} ({target.stat().st_size // 1024} KB)")


if __name__ == "__main__":
    main()
