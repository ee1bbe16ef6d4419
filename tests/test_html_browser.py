"""The HTML report in a real headless browser: no script errors, no network, plots drawn, data text shown as text.

Drives Debian's chromium through the DevTools protocol (a websocket on the
loopback address) and saves a screenshot and the page of every sample table
under ``artifacts/html/``.
"""

from __future__ import annotations

import base64
import json
import shutil
import subprocess
import tempfile
import time
import urllib.request
from pathlib import Path
from typing import Any, Iterator

import pytest
from conftest import ROOT
from sample_reports import NAMES, sample_html, sample_report
from test_reports import HOSTILE, hostile_report, plugin_report

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
pytestmark = pytest.mark.skipif(
    CHROMIUM is None, reason="Debian's chromium is not installed here (.ci/run installs it); the headless browser check needs it"
)
ARTIFACTS = ROOT / "artifacts" / "html"
START_SECONDS = 60.0
PAGE_SECONDS = 60.0
WIDTH = 1200
MAX_HEIGHT = 12000

PAGE_FACTS = """JSON.stringify({
  figures: Array.from(document.querySelectorAll('figure.plot')).map(function (f) {
    var svg = f.querySelector('svg');
    var box = svg ? svg.getBoundingClientRect() : {width: 0, height: 0};
    return {id: f.id, width: box.width, height: box.height,
            marks: svg ? svg.querySelectorAll('path, use, image, rect').length : 0};
  }),
  scripts: document.scripts.length,
  text: document.body.textContent,
  contents: Array.from(document.querySelectorAll('nav.toc a')).map(function (a) { return a.textContent; }),
  counts: Array.from(document.querySelectorAll('nav.toc li')).map(function (li) {
    var count = li.querySelector('.count');
    return [li.querySelector('a').textContent, count ? count.textContent : null];
  }),
  axes: Array.from(document.querySelectorAll('figure.plot')).map(function (f) {
    return [f.id, Array.from(f.querySelectorAll('svg g[id*="axes_"]')).map(function (g) { return g.textContent; })];
  }),
  collapsible: document.querySelectorAll('details.finding').length,
  ruleLinks: Array.from(document.querySelectorAll('details.finding summary a.rule')).map(function (a) { return a.getAttribute('href'); }),
  anchors: Array.from(document.querySelectorAll('article.rule-entry')).map(function (a) { return a.id; }),
  height: document.documentElement.scrollHeight
})"""


class DevTools:
    """A minimal DevTools-protocol client over one page's websocket."""

    def __init__(self, url: str) -> None:
        import websocket

        self.socket = websocket.create_connection(url, timeout=PAGE_SECONDS, suppress_origin=True)
        self.next_id = 0
        self.events: list[dict[str, Any]] = []

    def call(self, method: str, **params: Any) -> dict[str, Any]:
        self.next_id += 1
        wanted = self.next_id
        self.socket.send(json.dumps({"id": wanted, "method": method, "params": params}))
        while True:
            message = json.loads(self.socket.recv())
            if message.get("id") == wanted:
                if "error" in message:
                    raise RuntimeError(f"{method}: {message['error']}")
                return message.get("result", {})
            self.events.append(message)

    def wait_for(self, method: str) -> dict[str, Any]:
        deadline = time.monotonic() + PAGE_SECONDS
        while time.monotonic() < deadline:
            for i, event in enumerate(self.events):
                if event.get("method") == method:
                    return self.events.pop(i)
            self.events.append(json.loads(self.socket.recv()))
        raise TimeoutError(f"no {method} within {PAGE_SECONDS:.0f} s")

    def close(self) -> None:
        self.socket.close()


def _no_proxy_get(url: str) -> Any:
    opener = urllib.request.build_opener(urllib.request.ProxyHandler({}))
    with opener.open(url, timeout=10) as response:
        return json.loads(response.read().decode("utf-8"))


@pytest.fixture(scope="module")
def browser() -> Iterator[DevTools]:
    """One headless chromium for the module, with a fresh profile, reached on the loopback address."""
    profile = Path(tempfile.mkdtemp(prefix="prefit-chromium-"))
    assert CHROMIUM is not None
    process = subprocess.Popen(
        [
            CHROMIUM,
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--no-first-run",
            "--disable-dev-shm-usage",
            f"--user-data-dir={profile}",
            "--remote-debugging-address=127.0.0.1",
            "--remote-debugging-port=0",
            "about:blank",
        ],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    try:
        port_file = profile / "DevToolsActivePort"
        deadline = time.monotonic() + START_SECONDS
        while not (port_file.exists() and port_file.read_text().strip()):
            if process.poll() is not None or time.monotonic() > deadline:
                pytest.fail(f"chromium did not start (exit code {process.poll()})")
            time.sleep(0.1)
        port = int(port_file.read_text().split()[0])
        pages = [t for t in _no_proxy_get(f"http://127.0.0.1:{port}/json/list") if t.get("type") == "page"]
        client = DevTools(pages[0]["webSocketDebuggerUrl"])
        for domain in ("Page", "Runtime", "Log", "Network"):
            client.call(f"{domain}.enable")
        yield client
        client.close()
    finally:
        process.terminate()
        try:
            process.wait(timeout=10)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait(timeout=10)
        shutil.rmtree(profile, ignore_errors=True)


def load(browser: DevTools, html: str, name: str) -> dict[str, Any]:
    """Open ``html`` from a file, collect errors and requests, save the page and a full-page screenshot."""
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    page = ARTIFACTS / f"{name}.html"
    page.write_text(html, encoding="utf-8")
    browser.events.clear()
    browser.call("Emulation.setDeviceMetricsOverride", width=WIDTH, height=900, deviceScaleFactor=1, mobile=False)
    browser.call("Page.navigate", url=page.resolve().as_uri())
    browser.wait_for("Page.loadEventFired")
    facts = json.loads(browser.call("Runtime.evaluate", expression=PAGE_FACTS, returnByValue=True)["result"]["value"])
    height = int(min(max(facts["height"], 900), MAX_HEIGHT))
    browser.call("Emulation.setDeviceMetricsOverride", width=WIDTH, height=height, deviceScaleFactor=1, mobile=False)
    shot = browser.call("Page.captureScreenshot", format="png", captureBeyondViewport=True)
    (ARTIFACTS / f"{name}.png").write_bytes(base64.b64decode(shot["data"]))
    events = list(browser.events)
    facts["errors"] = [
        e["params"]
        for e in events
        if e.get("method") == "Runtime.exceptionThrown"
        or (e.get("method") == "Log.entryAdded" and e["params"]["entry"].get("level") == "error")
        or (e.get("method") == "Runtime.consoleAPICalled" and e["params"].get("type") in ("error", "assert"))
        or e.get("method") == "Page.javascriptDialogOpening"
    ]
    facts["requests"] = [
        e["params"]["request"]["url"]
        for e in events
        if e.get("method") == "Network.requestWillBeSent" and not e["params"]["request"]["url"].startswith(("file:", "data:"))
    ]
    return facts


@pytest.mark.parametrize("name", NAMES)
def test_sample_table_page_loads_cleanly_with_its_plots(browser: DevTools, name: str) -> None:
    report = sample_report(name)
    facts = load(browser, sample_html(name), name)
    assert facts["errors"] == []
    assert facts["requests"] == []
    assert facts["scripts"] == 0
    assert (ARTIFACTS / f"{name}.png").stat().st_size > 10_000
    drawn = {f["id"]: f for f in facts["figures"]}
    numeric_predictors = any(term.kind == "numeric" for term in report.design.terms)
    expected = {"t1-missingness", "t1-ranges"} if numeric_predictors else {"t1-missingness"}
    assert expected <= set(drawn)
    for figure in drawn.values():
        if figure["marks"] or figure["id"] != "t1-missingness":
            assert figure["width"] > 200 and figure["height"] > 100 and figure["marks"] > 5, figure
    for finding in report.findings:
        assert " ".join(finding.message.split()) in " ".join(facts["text"].split())
    assert facts["collapsible"] == len(report.findings)
    assert {"design", *(f.grade.word for f in report.findings)} <= set(facts["contents"])


def test_findings_link_to_their_rules_entries_and_the_catalogue_page_holds_every_rule(browser: DevTools, registry: Any) -> None:
    from prefit.catalogue import catalogue_html

    report_facts = load(browser, sample_html("warehouse_submeters"), "links-warehouse_submeters")
    targets = {href.lstrip("#") for href in report_facts["ruleLinks"]}
    assert targets and targets <= set(report_facts["anchors"])
    catalogue = load(browser, catalogue_html(), "prefit-rules")
    assert catalogue["errors"] == [] and catalogue["requests"] == [] and catalogue["scripts"] == 0
    assert len(catalogue["anchors"]) == len(registry)


def test_a_table_without_holes_says_so_instead_of_an_empty_map(browser: DevTools) -> None:
    facts = load(browser, sample_html("warehouse_clean"), "no-holes-warehouse_clean")
    assert "No missing values" in facts["text"]


def test_hostile_names_render_as_text_in_the_browser(browser: DevTools) -> None:
    facts = load(browser, plugin_report().to_html(), "hostile-names")
    assert facts["errors"] == [] and facts["requests"] == [] and facts["scripts"] == 0
    assert HOSTILE in facts["text"]
    assert "invented <warehouse>.csv" in facts["text"]
    assert {"t1-influence", "t1-missingness", "t1-collinearity", "t1-ranges"} <= {f["id"] for f in facts["figures"]}


def test_a_table_of_hostile_names_and_cells_runs_no_script_and_loads_nothing(browser: DevTools) -> None:
    facts = load(browser, hostile_report().to_html(), "hostile-cells")
    assert facts["errors"] == [] and facts["requests"] == [] and facts["scripts"] == 0
    assert "<script>alert(1)</script>" in facts["text"]  # shown as text, never parsed as an element
    assert "line\\nbreak" in facts["text"] and "(5,000,000 characters)" in facts["text"]
    assert "\x1b" not in facts["text"] and "\u202e" not in facts["text"]


def _axes_text(facts: dict[str, Any], figure: str, title: str) -> str:
    """The text of the plot axes in ``figure`` whose title is ``title`` (tick labels, legend, bar labels)."""
    panels = dict((key, texts) for key, texts in facts["axes"])[figure]
    return " ".join(" ".join(next(text for text in panels if title in text).split()).split())


def test_contents_count_the_findings_of_each_grade_and_findings_fold(browser: DevTools) -> None:
    from prefit.findings import count_by_grade

    report = sample_report("warehouse_submeters")
    facts = load(browser, sample_html("warehouse_submeters"), "contents-warehouse_submeters")
    shown = {word: count for word, count in facts["counts"] if count is not None}
    assert shown == {word: str(n) for word, n in count_by_grade(list(report.findings)).items() if n}
    assert facts["collapsible"] == len(report.findings)
    # a click on a finding's summary folds it to its one-line summary, a second click opens it again
    fold = """(function () {
      var d = document.querySelector('details.finding'), before = d.getBoundingClientRect().height;
      d.querySelector('summary').click();
      var folded = [d.open, d.getBoundingClientRect().height];
      d.querySelector('summary').click();
      return JSON.stringify([before, folded[0], folded[1], d.open]);
    })()"""
    before, open_after_click, folded_height, reopened = json.loads(browser.call("Runtime.evaluate", expression=fold, returnByValue=True)["result"]["value"])
    assert open_after_click is False and folded_height < before and reopened is True


def test_vif_chart_draws_each_term_once_on_a_log_scale_with_an_exact_dependency_off_scale(browser: DevTools) -> None:
    report = sample_report("warehouse_submeters")
    facts = load(browser, sample_html("warehouse_submeters"), "vif-warehouse_submeters")
    vif = _axes_text(facts, "t1-collinearity", "variance inflation by term")
    assert "log scale" in vif
    # compressor_type is one term of several dummies: one bar (GVIF^(1/df)), no bar per dummy
    shared = report.figures.collinearity if report.figures is not None else None
    assert shared is not None
    dummies = [name for name in shared.names if name.startswith("compressor_type") and name != "compressor_type"]
    assert dummies and "compressor_type" in vif and not any(d in vif for d in dummies)
    # gross_kwh = compressor_kwh + lighting_kwh + defrost_kwh exactly: its inflation is infinite, drawn off scale
    assert "inf (off scale)" in vif
    graded = dict(zip(shared.terms, shared.inflation))
    assert f"{graded['compressor_type']:.3g}" in vif


def test_cook_contours_are_drawn_at_the_rules_own_levels(browser: DevTools) -> None:
    import scipy.stats

    from prefit.teaching.checking import check_demonstration
    from prefit.teaching.influence import mega_site

    report = check_demonstration(mega_site())  # 30 invented sites, one of them a mega-site with Cook's D far above 1
    facts = load(browser, report.to_html(), "cook-mega_site-demonstration")
    assert facts["errors"] == [] and facts["requests"] == []
    # the demonstration's design has full rank: its parameters are the fit's rank
    n, rank = report.complete_cases, report.parameters
    df_resid = n - rank
    legend = _axes_text(facts, "t1-influence", "Cook")
    # the rule's own thresholds: weakens at 4/n, misleads at the median of F(p, n - p), not fixed levels
    assert f"Cook's distance {4 / n:.3g} (weakens)" in legend
    assert f"Cook's distance {scipy.stats.f.ppf(0.5, rank, df_resid):.3g} (misleads)" in legend
    assert "(reference)" not in legend
