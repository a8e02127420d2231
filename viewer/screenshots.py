"""Screenshots of each section of a report, for docs/: ``python -m viewer.screenshots REPORT DOCS_DIR``.

Each section is shown alone through the page's own ``#only-KEY`` address (no script), captured in
headless Chromium and cropped where the section ends.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

from .browser import screenshot
from .report import SECTIONS


def crop_page(png: Path, margin: int = 24) -> tuple[int, int]:
    """Cut the rows below the last one that differs from the page's bottom-left colour; returns
    the new (height, width)."""
    import matplotlib.image as mpimg
    import matplotlib.pyplot as plt

    image = mpimg.imread(png)[..., :3]
    background = image[-1, 0]
    rows = np.flatnonzero((np.abs(image - background).sum(axis=2) > 0.02).any(axis=1))
    if len(rows):
        image = image[: min(len(image), rows[-1] + margin)]
        plt.imsave(png, image)
    return image.shape[:2]


def section_screenshots(report, folder, height: int = 7000) -> list[Path]:
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    url = Path(report).resolve().as_uri()
    made = []
    for key, _ in SECTIONS:
        png = folder / f"report-{key}.png"
        result = screenshot(f"{url}#only-{key}", png, height=height)
        if result.returncode != 0 or not png.exists():
            raise RuntimeError(f"chromium failed on section {key}: {result.stderr[-500:]}")
        crop_page(png)
        made.append(png)
    return made


if __name__ == "__main__":  # pragma: no cover
    if len(sys.argv) != 3:
        sys.exit("usage: python -m viewer.screenshots REPORT DOCS_DIR")
    for path in section_screenshots(sys.argv[1], sys.argv[2]):
        print(path)
