"""``import explorer`` loads only what every user needs (issue 15: no first-call tax).

The property library, Dask and the app's figure and widget libraries load inside the
functions that use them.
"""

from __future__ import annotations

import json
import subprocess
import sys

HEAVY = ("CoolProp", "dask", "distributed", "plotly", "ipywidgets", "anywidget", "pint")


def test_import_explorer_leaves_heavy_libraries_unloaded():
    code = ("import sys, json, explorer; "
            f"print(json.dumps([m for m in {list(HEAVY)!r} if m in sys.modules]))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         timeout=120)
    assert out.returncode == 0, out.stderr
    assert json.loads(out.stdout.strip().splitlines()[-1]) == []
