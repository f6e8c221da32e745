"""Regenerate docs/report.png: the report of the bundled demo frogs, as headless Chromium shows it.

    python docs/make_screenshot.py [--compressor SPEC]

Needs kinpress installed and Debian's chromium (`apt-get install chromium`). The page is
written to a temporary folder, photographed at 1100 pixels wide, cut to its first
SCREEN_HEIGHT pixels and reduced to 256 colours, so the picture stays small.
"""

from __future__ import annotations

import argparse
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DEMO = Path("datasets") / "karsvell-frogs"  # relative to ROOT, where the command runs
TARGET = ROOT / "docs" / "report.png"
SCREEN_WIDTH = 1100
SCREEN_HEIGHT = 2300


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--compressor", default="auto", help="as kinpress -c (default auto)")
    args = parser.parse_args()
    chromium = shutil.which("chromium") or shutil.which("chromium-browser")
    if chromium is None:
        print("make_screenshot: chromium is not installed (apt-get install chromium)")
        return 1
    with tempfile.TemporaryDirectory() as folder:
        page, shot = Path(folder) / "frogs.html", Path(folder) / "frogs.png"
        command = [
            sys.executable, "-m", "kinpress.cli", "report", str(DEMO / "genomes"),
            "--strand", "both", "--outgroup", "KVM30418", "--bootstrap", "5",
            "--labels", f"{DEMO / 'labels.tsv'}:clade", "-c", args.compressor,
            "--title", "Karsvell frogs: 14 mitogenomes", "-o", str(page),
        ]  # fmt: skip
        subprocess.run(command, check=True, cwd=ROOT)
        subprocess.run(
            [chromium, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars",
             "--host-resolver-rules=MAP * ~NOTFOUND", f"--user-data-dir={folder}/profile",
             f"--screenshot={shot}", f"--window-size={SCREEN_WIDTH},{SCREEN_HEIGHT}",
             page.as_uri()],
            check=True, capture_output=True,
        )  # fmt: skip
        from PIL import Image

        with Image.open(shot) as image:
            small = image.convert("RGB").quantize(colors=256, dither=Image.Dither.NONE)
            small.save(TARGET, optimize=True)
    print(f"make_screenshot: wrote {TARGET} ({TARGET.stat().st_size // 1024} KiB)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
