"""Render the first page of the demo design sheet to docs/design_sheet_page1.png.

Runs the demo design into a temporary folder and converts page 1 with pdftoppm
(Debian/Ubuntu: apt-get install poppler-utils). The README shows the result.

    python scripts/render_sheet_preview.py
"""

import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def main():
    if shutil.which("pdftoppm") is None:
        sys.exit("pdftoppm not found: install poppler-utils")
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "design"
        subprocess.run([sys.executable, "-m", "drainplan", "-q", "design",
                        str(ROOT / "demo_fields" / "project.toml"), "-o", str(out)], check=True)
        stem = Path(tmp) / "page"
        subprocess.run(["pdftoppm", "-f", "1", "-l", "1", "-r", "70", "-png",
                        str(out / "design_sheet.pdf"), str(stem)], check=True)
        page = next(Path(tmp).glob("page*.png"))
        target = ROOT / "docs" / "design_sheet_page1.png"
        target.parent.mkdir(exist_ok=True)
        shutil.copyfile(page, target)
        print(f"wrote {target}")


if __name__ == "__main__":
    main()
