"""The app as its users see it: JupyterLab in headless Chromium runs notebooks/quick_start.ipynb.

One test walks the whole path a user takes: it starts JupyterLab on 127.0.0.1 with a token and a
fresh workspace, opens a copy of the quick-start notebook, runs every cell, checks that the
notebook's figures and the app render with data and without console errors, changes an input
and runs again (the field must change), sizes the cooling on the Sizing tab, exports the report
and opens it from disk with the network blocked. Screenshots go to the folder printed at the end
(``BROWSER_ARTIFACTS``, default ``test-artifacts/browser/``).

The browser is the system's Chromium (Debian package ``chromium``; ``CHROMIUM_PATH`` overrides);
Playwright drives it through ``executable_path`` and never downloads a browser. Without Chromium
or Playwright the test is skipped with the reason, except when ``CI_REQUIRE_BROWSER=1`` (set by
``.ci/run``): then a missing browser fails the test.

Timings (the app's open time, the first run after the click, the whole test) are printed, not
asserted: speed lives in ``python -m explorer.bench`` (section ``app``).
"""

from __future__ import annotations

import json
import os
import secrets
import shutil
import signal
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
NOTEBOOK = ROOT / "notebooks" / "quick_start.ipynb"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update",
                 "--disable-sync", "--disable-dev-shm-usage"]
VIEWPORT = {"width": 1400, "height": 1900}  # tall: element screenshots show a whole tab
# console messages that are not the notebook's or the app's (JupyterLab's own start-up chatter)
_IGNORED_CONSOLE = ("favicon", "Failed to load resource: the server responded with a status of 404")


def _chromium() -> str | None:
    candidates = [os.environ.get("CHROMIUM_PATH"), shutil.which("chromium"),
                  shutil.which("chromium-browser"), "/usr/bin/chromium"]
    for path in candidates:
        if path and Path(path).is_file() and os.access(path, os.X_OK):
            return path
    return None


def _unavailable() -> str | None:
    """Why the browser test cannot run here (None when it can)."""
    missing = []
    if _chromium() is None:
        missing.append("no Chromium executable (apt-get install chromium, or set CHROMIUM_PATH)")
    for module in ("playwright", "jupyterlab"):
        try:
            __import__(module)
        except ImportError:
            missing.append(f"Python package {module!r} not installed (pip install -e '.[test]')")
    return "; ".join(missing) or None


@pytest.fixture(scope="module")
def artifacts() -> Path:
    folder = Path(os.environ.get("BROWSER_ARTIFACTS", ROOT / "test-artifacts" / "browser"))
    folder.mkdir(parents=True, exist_ok=True)
    for old in folder.glob("*.png"):
        old.unlink()
    return folder


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _descendants(pid: int) -> list[int]:
    """Every process below ``pid`` (kernels start their own sessions, so a process-group kill
    alone would miss them)."""
    children: dict[int, list[int]] = {}
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            stat = (entry / "stat").read_text()
        except OSError:
            continue
        ppid = int(stat.rsplit(")", 1)[1].split()[1])
        children.setdefault(ppid, []).append(int(entry.name))
    found, todo = [], [pid]
    while todo:
        for child in children.get(todo.pop(), []):
            found.append(child)
            todo.append(child)
    return found


def _alive(pid: int) -> bool:
    try:
        stat = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return False
    return stat.rsplit(")", 1)[1].split()[0] != "Z"


class _Lab:
    """A JupyterLab server on 127.0.0.1 with a token, a private config and a fresh workspace."""

    def __init__(self, root: Path):
        self.root = root
        self.token = secrets.token_hex(16)
        self.port = _free_port()
        self.url = f"http://127.0.0.1:{self.port}"
        home = root / ".jupyter-home"
        settings = home / "settings" / "@jupyterlab" / "notebook-extension"
        settings.mkdir(parents=True)
        # every cell stays in the page (no virtual scrolling) so the test can find the app
        (settings / "tracker.jupyterlab-settings").write_text(json.dumps({"windowingMode": "none"}))
        notices = home / "settings" / "@jupyterlab" / "apputils-extension"
        notices.mkdir(parents=True)  # no "get notified about news?" toast over the page
        (notices / "notification.jupyterlab-settings").write_text(
            json.dumps({"fetchNews": "false", "checkForUpdates": False}))
        # private config, data and runtime folders: no user kernel or setting steps in; the
        # kernel is this environment's Python (ipykernel's spec in sys.prefix)
        env = {**os.environ, "JUPYTER_CONFIG_DIR": str(home / "config"),
               "JUPYTER_DATA_DIR": str(home / "data"), "JUPYTER_RUNTIME_DIR": str(home / "runtime"),
               "JUPYTER_PREFER_ENV_PATH": "1", "PYTHONUNBUFFERED": "1"}
        self.log = open(root / "jupyterlab.log", "w")  # noqa: SIM115 (closed in stop)
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "jupyter", "lab", "--no-browser", "--allow-root",
             "--ServerApp.ip=127.0.0.1", "--ServerApp.terminals_enabled=False",
             f"--ServerApp.port={self.port}", "--ServerApp.port_retries=0",
             f"--IdentityProvider.token={self.token}", f"--ServerApp.root_dir={root}",
             f"--LabServerApp.user_settings_dir={home / 'settings'}",
             f"--LabServerApp.workspaces_dir={home / 'workspaces'}",
             "--LabApp.news_url=None", "--LabApp.check_for_updates_class="
             "jupyterlab.handlers.announcements.NeverCheckForUpdate",
             "--expose-app-in-browser"],
            cwd=root, env=env, stdout=self.log, stderr=subprocess.STDOUT, start_new_session=True)
        self._wait_ready(90.0)

    def _wait_ready(self, timeout: float) -> None:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"JupyterLab exited early; see {self.root / 'jupyterlab.log'}")
            try:
                with urllib.request.urlopen(f"{self.url}/api/status?token={self.token}",
                                            timeout=2) as r:
                    if r.status == 200:
                        return
            except OSError:
                time.sleep(0.3)
        raise RuntimeError(f"JupyterLab did not answer within {timeout:g} s")

    def stop(self) -> list[int]:
        """Shut the server and its kernels down; return the pids still alive after it (none)."""
        pids = _descendants(self.proc.pid)
        try:  # the server's own shutdown also ends its kernels
            req = urllib.request.Request(f"{self.url}/api/shutdown?token={self.token}",
                                         method="POST")
            urllib.request.urlopen(req, timeout=5).close()
            self.proc.wait(15)
        except (OSError, subprocess.TimeoutExpired):
            pass
        for sig in (signal.SIGTERM, signal.SIGKILL):
            alive = [p for p in [self.proc.pid, *pids] if _alive(p)]
            if not alive:
                break
            for pid in alive:  # only the processes this test started, by their ids
                try:
                    os.kill(pid, sig)
                except ProcessLookupError:
                    pass
            try:
                self.proc.wait(5)
            except subprocess.TimeoutExpired:
                pass
            time.sleep(0.5)
        self.log.close()
        return [p for p in [self.proc.pid, *pids] if _alive(p)]


# ---------------------------------------------------------------------------------------------
# what the page shows, read in the browser

_JS_FIGURES = """(root) => Array.from((root || document).querySelectorAll('.js-plotly-plot')).map(gd => ({
  types: (gd._fullData || []).map(t => t.type || 'scatter'),
  points: (gd._fullData || []).reduce((n, t) => n + ((t.z && t.z.length) || (t.y && t.y.length) || 0), 0),
  title: gd.layout && gd.layout.title ? (gd.layout.title.text || '') : '',
  annotations: ((gd.layout && gd.layout.annotations) || []).map(a => a.text || ''),
  width: gd.getBoundingClientRect().width, height: gd.getBoundingClientRect().height,
  visible: gd.offsetParent !== null,
}))"""

_JS_HEATMAP_Z = """(root) => { const gd = Array.from(root.querySelectorAll('.js-plotly-plot'))
  .find(g => g.offsetParent !== null && (g._fullData || []).some(t => t.type === 'heatmap'));
  if (!gd) return null; const t = gd._fullData.find(t => t.type === 'heatmap');
  return {z: Array.from(t.z, row => Array.from(row)), title: gd.layout.title.text,
          zmin: t.zmin, zmax: t.zmax}; }"""


def _run_command(page, command: str, index: int | None = None) -> None:
    """Run a JupyterLab command on the open notebook (``index`` selects a cell first) and wait."""
    page.evaluate("""async ([command, index]) => {
        const app = window.jupyterapp; const panel = app.shell.currentWidget;
        if (index !== null) { panel.content.activeCellIndex = index; }
        await app.commands.execute(command); }""", [command, index])


def _cells(page) -> list[dict]:
    return page.evaluate("""() => window.jupyterapp.shell.currentWidget.content.widgets
        .map(c => ({type: c.model.type, source: c.model.sharedModel.getSource()}))""")


def _wait_kernel_idle(page, timeout_s: float = 120.0) -> None:
    page.wait_for_function("""() => { const p = window.jupyterapp.shell.currentWidget;
        const k = p && p.sessionContext.session && p.sessionContext.session.kernel;
        return k && k.status === 'idle'; }""", timeout=timeout_s * 1000)


def _tab(app, name: str):
    return app.locator(".lm-TabBar-tab", has_text=name).first


def _shot(locator, folder: Path, name: str, shots: list[str]) -> None:
    path = folder / f"{len(shots) + 1:02d}_{name}.png"
    locator.screenshot(path=str(path))
    shots.append(path.name)


def _set_input(app, group: str, name: str, value: str) -> None:
    """Type ``value`` into input ``name`` on the input tab ``group`` (as a user would)."""
    _tab(app, group).click()
    box = app.locator(f".pte-row-{name} input")
    box.fill(value)
    box.press("Tab")
    app.page.wait_for_timeout(300)


def _wait_status(page, app, words: str, timeout_s: float) -> float:
    t0 = time.perf_counter()
    app.locator(".pte-status", has_text=words).wait_for(timeout=timeout_s * 1000)
    return time.perf_counter() - t0


# ---------------------------------------------------------------------------------------------


def test_quick_start_in_a_browser(tmp_path, artifacts):
    reason = _unavailable()
    if reason:
        if os.environ.get("CI_REQUIRE_BROWSER") == "1":
            pytest.fail(f"browser test required (CI_REQUIRE_BROWSER=1) but cannot run: {reason}")
        pytest.skip(f"browser test skipped: {reason}")
    from playwright.sync_api import sync_playwright

    started = time.perf_counter()
    work = tmp_path / "lab"
    (work / "notebooks").mkdir(parents=True)
    shutil.copy(NOTEBOOK, work / "notebooks" / NOTEBOOK.name)
    shots: list[str] = []
    errors: list[str] = []
    timings: dict[str, float] = {}
    lab = _Lab(work)
    leftover: list[int] = []
    try:
        with sync_playwright() as pw:
            browser = pw.chromium.launch(executable_path=_chromium(), args=CHROMIUM_ARGS)
            try:
                _walk(browser, lab, work, artifacts, shots, errors, timings)
                _report_offline(browser, work, artifacts, shots)
            finally:
                browser.close()
    finally:
        leftover = lab.stop()
    timings["whole test"] = time.perf_counter() - started
    print(f"\nbrowser test screenshots in {artifacts}: {', '.join(shots)}")
    print("browser test timings: " + ", ".join(f"{k} {v:.2f}{'' if '/s' in k else ' s'}"
                                               for k, v in timings.items()))
    assert not leftover, f"processes still running after the test: {leftover}"


def _walk(browser, lab, work, artifacts, shots, errors, timings) -> None:
    context = browser.new_context(viewport=VIEWPORT)
    page = context.new_page()
    page.set_default_timeout(60_000)

    def on_console(msg):
        if msg.type == "error" and not any(s in msg.text for s in _IGNORED_CONSOLE):
            errors.append(f"{msg.text} (after {shots[-1] if shots else 'the start'})")

    page.on("console", on_console)
    page.on("pageerror", lambda exc: errors.append(f"page error: {exc}"))
    try:
        _steps(page, lab, work, artifacts, shots, errors, timings)
    except Exception:
        page.screenshot(path=str(artifacts / "failure.png"), full_page=True)
        print(f"\nbrowser test failed; the page is in {artifacts / 'failure.png'}")
        raise
    finally:
        context.close()


def _steps(page, lab, work, artifacts, shots, errors, timings) -> None:
    workspace = f"pte-{secrets.token_hex(4)}"  # a fresh workspace: no saved layout reopens
    page.goto(f"{lab.url}/lab/workspaces/{workspace}/tree/notebooks/{NOTEBOOK.name}"
              f"?reset&token={lab.token}")
    page.wait_for_function("() => window.jupyterapp && window.jupyterapp.shell.currentWidget "
                           "&& window.jupyterapp.shell.currentWidget.content "
                           "&& window.jupyterapp.shell.currentWidget.content.widgets.length > 0")
    page.wait_for_function("() => window.jupyterapp.shell.currentWidget.sessionContext.isReady")
    cells = _cells(page)
    app_cell = next(k for k, c in enumerate(cells)
                    if c["type"] == "code" and "explore(" in c["source"])

    # every cell above the app: the notebook's own figures
    t0 = time.perf_counter()
    _run_command(page, "notebook:run-all-above", app_cell)
    _wait_kernel_idle(page)
    timings["cells above the app"] = time.perf_counter() - t0
    figures = page.evaluate(_JS_FIGURES, None)
    assert len(figures) >= 3, f"expected the notebook's 3 figures, found {figures}"
    assert all(f["points"] > 0 for f in figures), figures
    assert any("heatmap" in f["types"] for f in figures), figures
    field = next(f for f in figures if "heatmap" in f["types"])
    assert field["height"] > 300, f"the notebook's field figure is cramped: {field}"
    _shot(page.locator(".jp-Cell").nth(app_cell - 3), artifacts, "notebook_field", shots)

    # the app cell: how soon the app shows
    t0 = time.perf_counter()
    _run_command_nowait(page, "notebook:run-cell", app_cell)
    app = page.locator(".pte-app")
    app.wait_for(state="visible", timeout=60_000)
    timings["app appears"] = time.perf_counter() - t0
    page.locator(".pte-app.pte-ready").wait_for(state="attached", timeout=90_000)
    timings["app ready (figures built)"] = time.perf_counter() - t0
    _wait_kernel_idle(page)
    if app_cell + 1 < len(cells):
        _run_command(page, "notebook:run-all-below", app_cell + 1)
    _shot(app, artifacts, "app_opened", shots)

    # first run: from the click to the field on screen
    run = app.locator("button.pte-run")
    t0 = time.perf_counter()
    run.click()
    page.wait_for_function("""() => { const root = document.querySelector('.pte-app');
        return Array.from(root.querySelectorAll('.js-plotly-plot')).some(g =>
            g.offsetParent !== null && (g._fullData || []).some(t => t.type === 'heatmap'
                                                                 && t.z && t.z.length)); }""")
    timings["first run, click to field"] = time.perf_counter() - t0
    _wait_status(page, app, "run 1 done in", 60)
    first = app.evaluate(_JS_HEATMAP_Z)
    assert first and first["z"], "the app's temperature field shows no data after a run"
    _shot(app, artifacts, "app_temperature", shots)
    for tab in ("SOC and heat", "Traces", "Heat split", "Summary"):
        _tab(app, tab).click()
        page.wait_for_timeout(400)
        shown = [f for f in app.evaluate(_JS_FIGURES) if f["visible"]]
        if tab != "Summary":
            explained = [f for f in shown if any("one value over the face" in a
                                                  for a in f["annotations"])]
            assert shown and all(f["points"] > 0 or f in explained for f in shown), (tab, shown)
            placeholders = [a for f in shown for a in f["annotations"] if a.startswith("Run to")]
            assert not placeholders, f"{tab}: placeholder left over the plot: {placeholders}"
        _shot(app, artifacts, f"app_{tab.lower().replace(' ', '_')}", shots)

    app.locator(".pte-scenario-name input").fill("1.5C")
    app.locator("button.pte-pin").click()

    # change an input, run again: the field changes
    _tab(app, "Temperature").click()
    _set_input(app, "Cell and duty", "discharge_c_rate", "3")
    run.click()
    _wait_status(page, app, "run 2 done in", 60)
    page.wait_for_timeout(500)
    second = app.evaluate(_JS_HEATMAP_Z)
    assert second["z"] != first["z"] and second["title"] != first["title"], \
        "the temperature field did not change after a new input and Run"
    _shot(app, artifacts, "app_after_rerun", shots)
    # pin it too, and colour both runs' maps on one range
    app.locator(".pte-scenario-name input").fill("3C")
    app.locator("button.pte-pin").click()
    app.locator(".pte-color-mode select").select_option(label="same for pinned runs")
    page.wait_for_timeout(700)
    locked = app.evaluate(_JS_HEATMAP_Z)
    assert locked["zmin"] < second["zmin"], "the locked colour range does not span both runs"
    _shot(app, artifacts, "app_colours_locked_to_pinned", shots)
    app.locator(".pte-color-mode select").select_option(label="fit each time")
    _tab(app, "Compare").click()
    page.wait_for_timeout(700)
    _shot(app, artifacts, "app_compare", shots)
    # how far to trust run 2: its verdicts checked against the fuller models (Summary tab)
    _tab(app, "Summary").click()
    t0 = time.perf_counter()
    app.locator("button.pte-check-fidelity").click()
    _wait_status(page, app, "checked against the fuller models", 90)
    timings["fidelity check of run 2"] = time.perf_counter() - t0
    assert app.locator(".pte-fidelity-result table").count() == 1, "no fidelity table shown"
    assert "Could a verdict flip" in app.locator(".pte-could-flip").inner_text()
    _shot(app, artifacts, "app_fidelity_check", shots)
    _tab(app, "Temperature").click()

    # the time slider: End goes to the last step
    slider = app.locator(".pte-time .noUi-handle").first
    slider.focus()
    slider.press("End")
    page.wait_for_timeout(600)
    label = app.locator(".pte-time-label").inner_text()
    assert "t = 0 s" not in label, f"End sent the time slider to the start: {label}"
    # play from the start, pause: the time stays where it was paused
    slider.press("Home")
    page.wait_for_timeout(400)
    play = app.locator(".pte-play")
    t0 = time.perf_counter()
    play.click()
    page.wait_for_timeout(1500)
    play.click()
    played = time.perf_counter() - t0
    page.wait_for_timeout(400)
    paused = app.locator(".pte-time-label").inner_text()
    shown = int(paused.split("(")[1].split(" of ")[0])
    assert shown > 1, f"play did not move the time: {paused}"
    page.wait_for_timeout(600)
    assert app.locator(".pte-time-label").inner_text() == paused, "pause did not keep the time"
    timings["play (pictures/s)"] = shown / max(1, round(int(paused.split(" of ")[1]
                                                               .rstrip(")")) / 60)) / played

    # an inlet at the temperature limit: the error stands next to the inlet
    _set_input(app, "Cooling", "inlet_C", "50")
    inlet_error = app.locator(".pte-row-inlet_C .pte-error")
    assert "not below the temperature limit" in inlet_error.inner_text()
    _shot(app.locator(".pte-inputs"), artifacts, "app_inlet_error", shots)
    _set_input(app, "Cooling", "inlet_C", "25")

    # the module: three cells along the coolant
    _set_input(app, "Cooling", "cells_per_plate", "3")
    run.click()
    _wait_status(page, app, "run 3 done in", 90)
    _tab(app, "Module").click()
    page.wait_for_timeout(700)
    module = [f for f in app.evaluate(_JS_FIGURES) if f["visible"]]
    assert module and module[0]["points"] > 0 and "Module of 3 cells" in module[0]["title"]
    _shot(app, artifacts, "app_module", shots)
    _set_input(app, "Cooling", "cells_per_plate", "1")

    # sizing the fin at 1.5C against a 15 K spread limit, checked on the fuller models
    _set_input(app, "Cell and duty", "discharge_c_rate", "1.5")
    _set_input(app, "Limits", "limit_spread_K", "15")
    _tab(app, "Sizing").click()
    app.locator(".pte-row-size_vary select").select_option(label="fin thickness (mm)")
    t0 = time.perf_counter()
    app.locator("button.pte-size").click()
    _wait_status(page, app, "sized in", 120)
    timings["sizing with the fidelity check"] = time.perf_counter() - t0
    page.wait_for_timeout(700)
    shown = [f for f in app.evaluate(_JS_FIGURES) if f["visible"]]
    assert shown and shown[0]["points"] > 0 and "Sizing" in shown[0]["title"], shown
    assert app.locator(".pte-sizing-text .pte-fidelity table").count() == 1, \
        "no fidelity check in the Sizing tab"
    text = app.locator(".pte-sizing-text").inner_text()
    assert "temperature_max_C" not in text and "spread_K" not in text, text
    _shot(app, artifacts, "app_sizing_and_fidelity", shots)
    _shot(app.locator(".pte-sizing-figure"), artifacts, "app_sizing_curve", shots)
    # the input box shows the sized value
    _tab(app, "Cooling").click()
    fin = app.locator(".pte-row-fin_mm input").input_value()
    assert fin != "0.5" and f"= {float(fin):g} mm" in text, (fin, text.splitlines()[0])
    _shot(app.locator(".pte-inputs"), artifacts, "app_sized_value_in_input", shots)

    # export the report next to the notebook
    path = app.locator(".pte-file-path input")
    path.fill("app_report")
    app.locator("button.pte-export-report").click()
    app.locator(".pte-file-status", has_text="wrote").wait_for(timeout=60_000)
    assert (work / "notebooks" / "app_report.html").is_file()
    assert not errors, f"console errors in JupyterLab: {errors}"


def _run_command_nowait(page, command: str, index: int) -> None:
    page.evaluate("""([command, index]) => { const app = window.jupyterapp;
        app.shell.currentWidget.content.activeCellIndex = index;
        app.commands.execute(command); }""", [command, index])


def _report_offline(browser, work, artifacts, shots) -> None:
    """The exported report opened from disk with every network request refused."""
    context = browser.new_context(viewport=VIEWPORT)
    refused: list[str] = []

    def block(route):
        if route.request.url.startswith("file:"):
            route.continue_()
        else:
            refused.append(route.request.url)
            route.abort()

    context.route("**/*", block)
    page = context.new_page()
    errors: list[str] = []
    page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
    page.on("pageerror", lambda exc: errors.append(str(exc)))
    page.goto((work / "notebooks" / "app_report.html").as_uri())
    page.wait_for_function("() => document.querySelectorAll('.js-plotly-plot').length > 0",
                           timeout=30_000)
    figures = page.evaluate(_JS_FIGURES, None)
    assert figures and all(f["points"] > 0 for f in figures), figures
    for name, full in (("report_offline_first_screen", False), ("report_offline_whole", True)):
        path = artifacts / f"{len(shots) + 1:02d}_{name}.png"
        page.screenshot(path=str(path), full_page=full)
        shots.append(path.name)
    assert not errors, f"console errors in the offline report: {errors} (refused: {refused})"
    context.close()
