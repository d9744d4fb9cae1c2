"""Make the images in docs/images/ from the synthetic demo (run under Xvfb).

    xvfb-run -a -s "-screen 0 1600x1000x24" python docs/make_screenshots.py

It captures the start-up screen of ``stackdepth view --demo`` and then runs the
feature scripts docs/shots_*.py, each of which writes its own images. Open the
PNGs and look at them before committing.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
from pathlib import Path

DOCS = Path(__file__).resolve().parent
IMAGES = DOCS / "images"


def main() -> int:
    IMAGES.mkdir(exist_ok=True)
    env = dict(os.environ)
    env.setdefault("NAPARI_CONFIG", os.path.join(tempfile.mkdtemp(), "settings.yaml"))
    failures = 0
    commands = [[sys.executable, "-m", "viewer_plugin.cli", "view", "--demo",
                 "--screenshot", str(IMAGES / "viewer_demo.png")]]
    commands += [[sys.executable, str(script)] for script in sorted(DOCS.glob("shots_*.py"))]
    for command in commands:
        print("running", " ".join(Path(c).name for c in command[1:]), flush=True)
        result = subprocess.run(command, env=env, timeout=600)
        failures += result.returncode != 0
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
