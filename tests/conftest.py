"""Shared test set-up: make the repo importable, and one hypothesis profile for CI.

Property tests explore new random inputs on a developer's machine, but CI (which sets CI=true)
replays the same derandomized sequence, so a red CI run is always reproducible.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

from hypothesis import settings

ROOT = Path(__file__).resolve().parent.parent
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

settings.register_profile("ci", derandomize=True, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")
