"""The report in a real browser (issue 13 item 1): every figure drawn under its own heading.

A two-run comparison with a sizing used to draw its figures into the wrong place (headings and
figure containers shared element ids). Here the report is opened in headless Chromium with
every network request refused; for each figure the test checks that plotly drew it, that its
container sits right below its heading and above the next heading, and that no element id is
used twice. Skipped, with the reason, when Chromium or the playwright package is missing (CI
sets ``CI_REQUIRE_BROWSER=1`` and then fails instead). The runs are synthetic (invented).
"""

from __future__ import annotations

import pytest
from browser_util import file_url, offline_page, require_browser
from synthetic import SyntheticSizing, synthetic_dataset

from explorer.report import write_report

# For each figure section: its heading, its plot container, whether plotly drew the plot, and
# where the next section starts (document order).
LAYOUT = """() => {
  const out = [];
  const sections = Array.from(document.querySelectorAll('section.plot'));
  for (const s of sections) {
    const h = s.querySelector(':scope > h3');
    const plot = s.querySelector(':scope > div > .plotly-graph-div, :scope > .plotly-graph-div');
    const hb = h.getBoundingClientRect(), pb = plot ? plot.getBoundingClientRect() : null;
    const next = s.nextElementSibling;
    out.push({heading: h.textContent, headingId: h.id,
              labelled: s.getAttribute('aria-labelledby'),
              plotId: plot ? plot.id : null,
              drawn: plot ? plot.querySelectorAll('.main-svg').length > 0 : false,
              headingBottom: hb.bottom + window.scrollY,
              plotTop: pb ? pb.top + window.scrollY : null,
              plotBottom: pb ? pb.bottom + window.scrollY : null,
              plotHeight: pb ? pb.height : 0,
              nextTop: next ? next.getBoundingClientRect().top + window.scrollY : null});
  }
  const ids = Array.from(document.querySelectorAll('[id]')).map(e => e.id);
  return {figures: out, ids: ids};
}"""


def _check_layout(result):
    ids = result["ids"]
    assert len(ids) == len(set(ids)), sorted({i for i in ids if ids.count(i) > 1})
    figures = result["figures"]
    assert figures, "no figure sections"
    for f in figures:
        name = f["heading"]
        assert f["labelled"] == f["headingId"], name
        assert f["plotId"] is not None and f["drawn"], f"{name}: plot not drawn"
        assert f["plotHeight"] > 200, f"{name}: plot collapsed"
        # right under its own heading: below it, with no more than a margin between
        assert 0 <= f["plotTop"] - f["headingBottom"] < 80, name
        if f["nextTop"] is not None:
            assert f["plotBottom"] <= f["nextTop"] + 1, f"{name}: runs into what follows"
    return figures


@pytest.fixture(scope="module")
def browser():
    """One headless Chromium page for the module, every http(s) request refused."""
    require_browser()
    with offline_page() as (page, errors):
        yield page, errors


def _open(browser, path):
    page, errors = browser
    errors.clear()
    page.goto(file_url(path))
    page.wait_for_function("document.querySelectorAll('.plotly-graph-div .main-svg')"
                           ".length > 0", timeout=30000)
    page.wait_for_timeout(300)
    result = page.evaluate(LAYOUT)
    assert not [e for e in errors if "net::" not in e], errors
    return _check_layout(result)


def test_two_runs_with_sizing_draw_each_figure_under_its_heading(tmp_path, browser):
    runs = {"baseline": synthetic_dataset(), "face plate": synthetic_dataset(rise_K=10.0)}
    path = write_report(runs, tmp_path / "two.html", sizing=SyntheticSizing())
    figures = _open(browser, path)
    headings = [f["heading"] for f in figures]
    assert "The runs overlaid" in headings
    assert headings[-1].startswith("Sizing curve")  # the sizing figure is the last, in place
    assert len(figures) >= 2 * 4 + 2  # each run's figures, the comparison and the sizing


def test_module_and_light_run_in_the_browser(tmp_path, browser):
    import explorer
    from explorer import results

    plate = explorer.cooling.cold_plate("water", 2.0, 25.0, cells_per_plate=2)
    module = explorer.simulate_module("van_nmc_66ah",
                                      explorer.duty.discharge(c_rate=2.0, end_time_s=240),
                                      explorer.cooling.face_plate(plate),
                                      electrochemistry="spm", grid=(6, 4),
                                      output_interval_s=4.0)
    back = results.open_results(results.save(module, tmp_path / "m.nc"))
    assert "field_time" in back.dims  # a light file with decimated fields
    path = write_report(back, tmp_path / "m.html", plotlyjs="beside")
    figures = _open(browser, path)
    assert any(f["heading"].startswith("Module along") for f in figures)
