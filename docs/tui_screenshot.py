"""Make docs/tui.png, the README's picture of `precess tui`: a deterministic run on the simulated
rig, saved as SVG by Textual, drawn to PNG by rsvg-convert (Debian: librsvg2-bin).

Usage: .venv/bin/python docs/tui_screenshot.py
"""

from __future__ import annotations

import asyncio
import re
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from tests.tui_support import make_app, plan_sequence, wait_for  # noqa: E402

OUT = ROOT / "docs" / "tui.png"
SIZE = (100, 30)


async def shoot(svg_path: Path) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        app = make_app(Path(tmp) / "shot.sqlite")
        async with app.run_test(size=SIZE) as pilot:
            await plan_sequence(pilot, "fid-sudden", {"shots": "6"})
            await pilot.press("plus", "g", "w")
            await wait_for(pilot, lambda: app.state.run is not None and app.state.run.exit_status == "completed"
                           and app.state.views is not None and app.state.views.shots_stacked == 6, 120)
            await pilot.pause(0.2)
            app.save_screenshot(str(svg_path))


def to_png(svg_path: Path, png_path: Path) -> None:
    """rsvg-convert lacks the SVG's web font and drops non-breaking spaces: give it plain spaces
    and a local monospace font (DejaVu Sans Mono has the braille block)."""
    svg = svg_path.read_text()
    svg = svg.replace("&#160;", " ").replace("<svg ", '<svg xml:space="preserve" ', 1)
    svg = re.sub(r"font-family: Fira Code, monospace", "font-family: DejaVu Sans Mono, monospace", svg)
    fixed = svg_path.with_suffix(".fixed.svg")
    fixed.write_text(svg)
    subprocess.run(["rsvg-convert", "-o", str(png_path), str(fixed)], check=True)


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        svg = Path(tmp) / "tui.svg"
        asyncio.run(shoot(svg))
        to_png(svg, Path(tmp) / "full.png")
        from PIL import Image  # installed with matplotlib

        Image.open(Path(tmp) / "full.png").convert("RGB").quantize(colors=32).save(OUT, optimize=True)
    print(f"wrote {OUT} ({OUT.stat().st_size // 1024} kB)")


if __name__ == "__main__":
    main()
