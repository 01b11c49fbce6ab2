"""Shared test set-up: the tool's user cache goes to a temporary folder, never the real one.

Set before collection (some test modules build designs at import), and inherited by the
subprocesses and Dask workers the tests start.
"""

from __future__ import annotations

import os
import shutil
import tempfile

_SAVED = {}


def pytest_configure(config):
    _SAVED["env"] = os.environ.get("EXPLORER_CACHE_DIR")
    _SAVED["dir"] = tempfile.mkdtemp(prefix="explorer-test-cache-")
    os.environ["EXPLORER_CACHE_DIR"] = _SAVED["dir"]


def pytest_unconfigure(config):
    if _SAVED.get("env") is None:
        os.environ.pop("EXPLORER_CACHE_DIR", None)
    else:
        os.environ["EXPLORER_CACHE_DIR"] = _SAVED["env"]
    if _SAVED.get("dir"):
        shutil.rmtree(_SAVED["dir"], ignore_errors=True)
