"""The simulators of validation/ranking_calibration.py, importable as ``ranking_calibration``
by the tests of this folder (which run short versions of that script's checks)."""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path

_SCRIPT = Path(__file__).resolve().parents[2] / "validation" / "ranking_calibration.py"
if "ranking_calibration" not in sys.modules:
    _spec = importlib.util.spec_from_file_location("ranking_calibration", _SCRIPT)
    _module = importlib.util.module_from_spec(_spec)
    sys.modules["ranking_calibration"] = _module
    _spec.loader.exec_module(_module)
