"""The batch example of docs/figures.md: the demo stacks made into figures with one command.

    python docs/shots_batch.py

Runs ``stackdepth demo DIR`` and ``stackdepth figures DIR -o FIGS --same-contrast`` (the command
shown in docs/figures.md) and puts the figures side by side in docs/images/figures_batch.png,
with the rows of summary.csv printed. Open the PNG and look at it before committing.
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
from pathlib import Path

IMAGES = Path(__file__).resolve().parent / "images"


def main() -> int:
    import imageio.v3 as iio
    from matplotlib.figure import Figure

    with tempfile.TemporaryDirectory() as tmp:
        stacks, figs = Path(tmp) / "stacks", Path(tmp) / "figs"
        cli = [sys.executable, "-m", "viewer_plugin.cli"]
        subprocess.run(cli + ["demo", str(stacks)], check=True)
        # exit status 2: the time series in the demo folder is refused (not a single z-stack)
        subprocess.run(cli + ["figures", str(stacks), "-o", str(figs), "--same-contrast"])
        print((figs / "summary.csv").read_text())
        panels = sorted(figs.glob("*.png"))
        figure = Figure(figsize=(4.2 * len(panels), 4.0), dpi=80, layout="constrained")
        for ax, path in zip(figure.subplots(1, len(panels)), panels):
            ax.imshow(iio.imread(path))
            ax.set_title(path.name, fontsize=10)
            ax.axis("off")
        IMAGES.mkdir(exist_ok=True)
        figure.savefig(IMAGES / "figures_batch.png")
    return 0


if __name__ == "__main__":
    sys.exit(main())
