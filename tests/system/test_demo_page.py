"""The demo page at ``GET /`` in a real headless Chromium against a real server.

A ``bandwise serve --host 127.0.0.1 --port P`` process (the README's run
command) serves the page; Debian's Chromium, driven by Playwright with
``executable_path``, loads it from 127.0.0.1. The checks compare what the page
draws with what the service answered, read straight off the network:

* the estimate path has one vertex per defined curve point, and its vertices
  are one affine map of the response's ``curve.x``/``curve.estimate``; the band
  and the data points follow the same map (so they share the y axis), and the
  y tick labels sit where that map puts their values;
* moving the bandwidth slider with the keyboard sends a new request with a
  larger numeric bandwidth and redraws the curve from its answer;
* switching to automatic shows the bandwidth the service chose, and the score
  chart has one vertex per scored candidate with the chosen value marked;
* the noise switch sends ``noise`` and the page shows the path the service
  reports (``diagnostics.noise``) and its lag-1 estimate;
* a pasted CSV is sent as it is and its rows are plotted;
* epoch-millisecond x values show as UTC dates on the axis, checked against
  Python's own calendar (``datetime``).

A full-page screenshot is written to ``artifacts/demo-page.png``.
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
from collections.abc import Iterator
from datetime import UTC, datetime
from pathlib import Path
from typing import Any
from urllib.parse import urljoin

import httpx
import numpy as np
import pytest

from tests.conftest import require_program
from tests.deploy.support import free_port, start_replica, stop, wait_until_ok

pytestmark = pytest.mark.system

REPO = Path(__file__).resolve().parents[2]
ARTIFACTS = REPO / "artifacts"
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]
WAIT_MS = 30_000
PIXEL_TOLERANCE = 0.02  # the page rounds coordinates to 0.01 px

# A few invented cold-store readings (outdoor °C, compressor kW), for the paste test only.
PASTED_CSV = """outdoor_c,power_kw
-1.5,23.9
0.5,24.6
2.0,25.1
4.5,26.4
6.0,26.8
8.5,28.1
10.0,28.5
12.5,29.9
15.0,31.6
17.5,33.8
20.0,37.0
22.5,39.6
"""


# ---------------------------------------------------------------- fixtures


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    """A real service process on a free loopback port; yields its base URL."""
    port = free_port()
    log = tmp_path_factory.mktemp("demo-page") / "server.log"
    process = start_replica(port, log, env={"BANDWISE_WORKERS": "1", "BANDWISE_ACCESS_LOG": "false"})
    base = f"http://127.0.0.1:{port}"
    try:
        wait_until_ok(f"{base}/healthz", process, timeout=60.0)
        yield base
    finally:
        stop(process)


@pytest.fixture(scope="module")
def browser() -> Iterator[Any]:
    """Debian's Chromium under Playwright (never a downloaded browser build)."""
    executable = require_program("chromium")
    from playwright.sync_api import sync_playwright

    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=executable, args=CHROMIUM_ARGS, headless=True)
        try:
            yield browser
        finally:
            browser.close()


class Page:
    """One browser tab on the demo page, recording every /v1/smooth exchange and page error."""

    def __init__(self, browser: Any, base: str) -> None:
        self.base = base
        self.context = browser.new_context(viewport={"width": 1360, "height": 1000})
        self.page = self.context.new_page()
        self.errors: list[str] = []
        self.smooth: list[Any] = []
        self.sent: list[Any] = []
        self.page.on("pageerror", lambda exc: self.errors.append(f"pageerror: {exc}"))
        self.page.on("console", lambda msg: msg.type == "error" and self.errors.append(f"console: {msg.text}"))
        self.page.on(
            "response",
            lambda r: r.url == f"{base}/v1/smooth" and r.request.method == "POST" and self.smooth.append(r),
        )
        self.page.on("request", lambda r: r.url == f"{base}/v1/smooth" and r.method == "POST" and self.sent.append(r))
        # Nothing may leave loopback: any other address is refused before a connection is made.
        self.page.route(re.compile(r"^(?!http://127\.0\.0\.1:\d+/).*"), lambda route: route.abort())

    def settle(self, seen: int) -> tuple[dict[str, Any], dict[str, Any]]:
        """Wait for a refit after the first ``seen`` exchanges to be drawn; return the last exchange."""
        for _ in range(WAIT_MS // 50):  # bounded: at most WAIT_MS in all
            if len(self.smooth) > seen:
                break
            self.page.wait_for_timeout(50)
        assert len(self.smooth) > seen, "the page sent no new POST /v1/smooth"
        self.page.wait_for_function("() => document.body.dataset.busy === '0'", timeout=WAIT_MS)
        # The drawn exchange is the answer to the last request sent; its response event can reach
        # this process after the page has drawn it, behind the answer to a request it superseded.
        last = self.sent[-1]
        response = None
        for _ in range(WAIT_MS // 50):  # bounded, as above
            response = next((r for r in reversed(self.smooth) if r.request is last), None)
            if response is not None:
                break
            self.page.wait_for_timeout(50)
        assert response is not None, "no answer recorded for the last POST /v1/smooth"
        assert response.status == 200, response.text()
        return json.loads(response.request.post_data), response.json()

    def attr(self, selector: str, name: str) -> str:
        value = self.page.get_attribute(selector, name)
        assert value is not None, f"{selector} has no {name}"
        return value

    def close(self) -> None:
        self.context.close()


@pytest.fixture()
def tab(browser: Any, server: str) -> Iterator[Page]:
    tab = Page(browser, server)
    try:
        yield tab
        assert tab.errors == [], tab.errors
    finally:
        tab.close()


def open_page(tab: Page) -> tuple[dict[str, Any], dict[str, Any]]:
    """Load the page and return the first smooth exchange it makes on its own."""
    tab.page.goto(f"{tab.base}/")
    return tab.settle(0)


# ---------------------------------------------------------------- geometry helpers


def subpaths(d: str) -> list[list[tuple[float, float]]]:
    """Vertices of an SVG path made of M/L/h0/Z commands, grouped by subpath."""
    out: list[list[tuple[float, float]]] = []
    for command, xs, ys in re.findall(r"([MLhZ])\s*(-?[\d.]+)?\s*(-?[\d.]+)?", d):
        if command == "M":
            out.append([(float(xs), float(ys))])
        elif command == "L":
            out[-1].append((float(xs), float(ys)))
    return out


def vertices(d: str) -> np.ndarray:
    return np.array([p for sub in subpaths(d) for p in sub], dtype=float).reshape(-1, 2)


def affine_fit(values: np.ndarray, pixels: np.ndarray) -> tuple[float, float, float]:
    """Least-squares ``pixels ~ a * values + b``; returns a, b and the largest miss in pixels."""
    centre = float(np.mean(values))  # centred, so epoch milliseconds (~1.7e12) stay well conditioned
    design = np.column_stack([values - centre, np.ones_like(values)])
    (a, b), *_ = np.linalg.lstsq(design, pixels, rcond=None)
    miss = float(np.max(np.abs(design @ np.array([a, b]) - pixels)))
    return float(a), float(b - a * centre), miss


def defined(*arrays: list[float | None]) -> np.ndarray:
    """Mask of positions where every array holds a number (JSON null marks undefined)."""
    return np.array([all(a[i] is not None for a in arrays) for i in range(len(arrays[0]))], dtype=bool)


def as_float(values: list[float | None], mask: np.ndarray) -> np.ndarray:
    return np.array([v for v, keep in zip(values, mask, strict=False) if keep], dtype=float)


def check_chart_matches(tab: Page, request: dict[str, Any], body: dict[str, Any]) -> tuple[float, float, float, float]:
    """Assert the chart is the response drawn with one x map and one y map; return both maps."""
    curve = body["curve"]
    est_mask = defined(curve["x"], curve["estimate"])
    path = vertices(tab.attr("#estimate-path", "d"))
    assert len(path) == int(est_mask.sum()) > 1
    ax, bx, miss_x = affine_fit(as_float(curve["x"], est_mask), path[:, 0])
    ay, by, miss_y = affine_fit(as_float(curve["estimate"], est_mask), path[:, 1])
    assert miss_x < PIXEL_TOLERANCE and miss_y < PIXEL_TOLERANCE, (miss_x, miss_y)
    assert ax > 0 and ay < 0  # x grows to the right, y grows upwards

    if "bands" in request:
        assert curve.get("lower") is not None and curve.get("upper") is not None
        band_mask = defined(curve["x"], curve["lower"], curve["upper"])
        parts = subpaths(tab.attr("#band-path", "d"))
        drawn = np.array([p for sub in parts for p in sub], dtype=float)
        assert len(drawn) == 2 * int(band_mask.sum())
        expected: list[tuple[float, float]] = []
        runs = np.split(np.flatnonzero(band_mask), np.flatnonzero(np.diff(np.flatnonzero(band_mask)) > 1) + 1)
        for run in runs:
            xs = [curve["x"][i] for i in run]
            expected += [(ax * x + bx, ay * curve["upper"][i] + by) for x, i in zip(xs, run, strict=False)]
            expected += [(ax * x + bx, ay * curve["lower"][i] + by) for x, i in reversed(list(zip(xs, run, strict=False)))]
        assert np.max(np.abs(drawn - np.array(expected))) < PIXEL_TOLERANCE
    else:
        assert tab.page.query_selector("#band-path") is None

    points = vertices(tab.attr("#data-points", "d"))
    assert len(points) == len(request["x"])
    assert np.max(np.abs(points[:, 0] - (ax * np.array(request["x"]) + bx))) < PIXEL_TOLERANCE
    assert np.max(np.abs(points[:, 1] - (ay * np.array(request["y"]) + by))) < PIXEL_TOLERANCE

    # The y axis is labelled consistently with the drawing: each tick label sits where its value is drawn.
    labels = tab.page.eval_on_selector_all(
        "#main-chart .axis-y .tick-label", "els => els.map(e => [e.textContent, +e.getAttribute('y')])"
    )
    assert len(labels) >= 3
    for text, y in labels:
        value = float(text.replace("\u2212", "-"))
        assert abs((ay * value + by) - (y - 4)) < PIXEL_TOLERANCE, (text, y)

    predictions = body["predictions"]
    drawn_flags = tab.page.eval_on_selector_all("#predictions .prediction", "els => els.map(e => e.dataset.extrapolated)")
    assert drawn_flags == [str(p["extrapolated"]).lower() for p in predictions]
    return ax, bx, ay, by


# ---------------------------------------------------------------- tests


def test_page_is_served_and_self_contained(server: str) -> None:
    page = httpx.get(f"{server}/", timeout=10.0)
    assert page.status_code == 200
    assert page.headers["content-type"].startswith("text/html")
    # Offline: every script and stylesheet the page names is served by the service itself.
    refs = re.findall(r'(?:src|href)="([^"]+)"', page.text)
    assets = [r for r in refs if r.endswith((".js", ".css"))]
    assert assets, refs
    for ref in assets:
        assert "//" not in ref, ref  # no other host, no CDN
        url = urljoin(f"{server}/", ref)
        assert httpx.get(url, timeout=10.0).status_code == 200, url
    # The ES modules the page imports are served from the same folder as app.js.
    app_js = urljoin(f"{server}/", next(r for r in assets if r.endswith("app.js")))
    modules = re.findall(r'from "(\./[\w.]+)"', httpx.get(app_js, timeout=10.0).text)
    assert modules
    for module in modules:
        assert httpx.get(urljoin(app_js, module), timeout=10.0).status_code == 200, module


def test_chart_is_drawn_from_the_api_response(tab: Page) -> None:
    request, body = open_page(tab)
    demo = httpx.get(f"{tab.base}/v1/demo/cold_store", timeout=10.0).json()
    assert request["x"] == demo["x"] and request["y"] == demo["y"]
    check_chart_matches(tab, request, body)
    # Axis titles carry the scenario's units.
    titles = tab.page.eval_on_selector_all("#main-chart .axis-title", "els => els.map(e => e.textContent)")
    assert any(demo["x_unit"] in t for t in titles) and any(demo["y_unit"] in t for t in titles), titles
    # At least one default prediction lies beyond the data and is marked as extrapolated.
    assert any(p["extrapolated"] for p in body["predictions"])
    assert tab.page.query_selector("#predictions .prediction.extrapolated .pt-pred-extra") is not None
    # Diagnostics and warnings are shown in words.
    assert str(body["diagnostics"]["n"]) in tab.page.inner_text("#diagnostics").replace(",", "")
    for warning in body["warnings"]:
        assert warning["message"] in tab.page.inner_text("#warnings")
    # The code panel holds the very request that was sent.
    curl = tab.page.inner_text("#curl-code")
    assert json.loads(curl[curl.index("{") : curl.rindex("}") + 1]) == request
    assert "from service.client import BandwiseClient" in tab.page.inner_text("#python-code")
    ARTIFACTS.mkdir(exist_ok=True)
    tab.page.screenshot(path=str(ARTIFACTS / "demo-page.png"), full_page=True)
    # The part a reader of the README needs: controls, chart, cautions, score chart and diagnostics.
    bottom = tab.page.evaluate("() => document.querySelector('#diagnostics-section').getBoundingClientRect().bottom + window.scrollY")
    tab.page.screenshot(
        path=str(ARTIFACTS / "demo-page-overview.png"), full_page=True, clip={"x": 0, "y": 0, "width": 1360, "height": bottom + 12}
    )


def test_code_panel_reproduces_the_fit(tab: Page) -> None:
    """The curl command and the Python snippet, run as shown, get the answer the page drew."""
    require_program("curl")
    open_page(tab)
    seen = len(tab.smooth)
    tab.page.select_option("#band-method", "none")
    _, body = tab.settle(seen)
    curl = tab.page.text_content("#curl-code") or ""
    done = subprocess.run(["bash", "-c", curl], capture_output=True, text=True, timeout=120, check=False)
    assert done.returncode == 0, done.stderr[-2000:]
    assert json.loads(done.stdout)["curve"] == body["curve"]
    snippet = tab.page.text_content("#python-code") or ""
    done = subprocess.run([sys.executable, "-c", snippet], capture_output=True, text=True, timeout=120, cwd=REPO, check=False)
    assert done.returncode == 0, done.stderr[-2000:]
    value, effective_df = (float(v) for v in done.stdout.split())
    assert value == body["bandwidth"]["value"]
    assert effective_df == pytest.approx(body["diagnostics"]["effective_df"], rel=1e-12)


def test_every_control_has_a_label(tab: Page) -> None:
    open_page(tab)
    unlabelled = tab.page.evaluate(
        """() => [...document.querySelectorAll('input, select, textarea, button')]
            .filter(e => !(e.labels && e.labels.length) && !e.getAttribute('aria-label')
                         && !(e.tagName === 'BUTTON' && e.textContent.trim()))
            .map(e => e.id || e.outerHTML)"""
    )
    assert unlabelled == []


def test_slider_refits_with_a_new_bandwidth(tab: Page) -> None:
    first_request, first = open_page(tab)
    assert first_request["bandwidth"] == "auto"
    before = tab.attr("#estimate-path", "d")
    tab.page.focus("#bw-slider")
    seen = len(tab.smooth)
    for _ in range(40):
        tab.page.keyboard.press("ArrowRight")
    request, body = tab.settle(seen)
    assert isinstance(request["bandwidth"], float | int)
    assert request["bandwidth"] > first["bandwidth"]["value"]  # right means wider on the log slider
    assert body["bandwidth"]["value"] == pytest.approx(request["bandwidth"])
    assert tab.page.is_checked("#bw-manual")
    after = tab.attr("#estimate-path", "d")
    assert after != before
    check_chart_matches(tab, request, body)


def test_automatic_shows_the_chosen_bandwidth(tab: Page) -> None:
    open_page(tab)
    tab.page.focus("#bw-slider")
    seen = len(tab.smooth)
    tab.page.keyboard.press("Home")
    manual_request, _ = tab.settle(seen)
    assert manual_request["bandwidth"] != "auto"
    seen = len(tab.smooth)
    tab.page.check("#bw-auto")
    request, body = tab.settle(seen)
    assert request["bandwidth"] == "auto"
    chosen = body["bandwidth"]["value"]
    readout = tab.page.inner_text("#bw-readout")
    assert "chosen" in readout
    shown = float(re.search(r"h = (−?[\d.]+(?:e[-+]?\d+)?)", readout).group(1).replace("\u2212", "-"))
    assert shown == pytest.approx(chosen, rel=5e-3)
    scored = [s for s in body["bandwidth"]["scores"] if s is not None]
    assert len(vertices(tab.attr("#score-path", "d"))) == len(scored)
    assert float(tab.attr("#score-chosen", "data-value")) == pytest.approx(chosen)
    check_chart_matches(tab, request, body)


def test_noise_switch_sends_noise_and_shows_the_diagnosis(tab: Page) -> None:
    request, body = open_page(tab)
    assert request["noise"] == "auto"
    readout = tab.page.inner_text("#noise-readout")
    assert f"treated as {body['diagnostics']['noise']}" in readout
    phi = body["diagnostics"]["noise_autocorrelation"]
    shown = float(re.search(r"autocorrelation (−?\d+(?:\.\d+)?)", readout).group(1).replace("\u2212", "-"))
    assert shown == pytest.approx(phi, abs=0.01)
    for choice in ("correlated", "independent"):
        seen = len(tab.smooth)
        tab.page.select_option("#noise", choice)
        request, body = tab.settle(seen)
        assert request["noise"] == choice
        assert body["diagnostics"]["noise"] == choice
        assert tab.attr("#noise-readout", "data-noise") == choice
        assert f"as chosen ({choice})" in tab.page.inner_text("#noise-readout")
        check_chart_matches(tab, request, body)


def independent_noise(tab: Page) -> None:
    """Choose independent noise: the chart tests compare geometry, and a short pasted series or the depot's
    daily cycle is read as strongly correlated noise by noise auto, whose band reaches far beyond the plot."""
    seen = len(tab.smooth)
    tab.page.select_option("#noise", "independent")
    tab.settle(seen)


def test_pasted_csv_is_plotted(tab: Page) -> None:
    open_page(tab)
    independent_noise(tab)
    tab.page.click("#paste-box summary")
    tab.page.fill("#paste", PASTED_CSV)
    seen = len(tab.smooth)
    tab.page.click("#paste-apply")
    request, body = tab.settle(seen)
    rows = [line.split(",") for line in PASTED_CSV.strip().splitlines()[1:]]
    assert request["x"] == [float(r[0]) for r in rows]
    assert request["y"] == [float(r[1]) for r in rows]
    assert tab.attr("#data-points", "data-count") == str(len(rows))
    check_chart_matches(tab, request, body)
    titles = tab.page.eval_on_selector_all("#main-chart .axis-title", "els => els.map(e => e.textContent)")
    assert "outdoor_c" in titles and "power_kw" in titles, titles

    # JSON arrays are accepted too.
    seen = len(tab.smooth)
    tab.page.fill("#paste", '{"x": [-2, 3, 8, 13, 18, 23], "y": [23.5, 25.6, 27.9, 30.1, 34.6, 39.5]}')
    tab.page.click("#paste-apply")
    request, body = tab.settle(seen)
    assert request["x"] == [-2, 3, 8, 13, 18, 23] and request["y"][-1] == 39.5
    check_chart_matches(tab, request, body)

    # A malformed paste is refused in words, and nothing is sent.
    seen = len(tab.smooth)
    tab.page.fill("#paste", "1,2,3\n4,5,6")
    tab.page.click("#paste-apply")
    assert "2 columns" in tab.page.inner_text("#paste-error")
    assert tab.page.is_visible("#paste-error")
    tab.page.wait_for_timeout(600)  # longer than the page's debounce: a request would have gone out
    assert len(tab.smooth) == seen


def test_switching_data_during_a_fit_draws_only_the_new_data(tab: Page) -> None:
    """An answer that arrives after the data changed must not be drawn over the new data."""
    with tab.page.expect_request(lambda r: r.url == f"{tab.base}/v1/smooth", timeout=WAIT_MS):
        tab.page.goto(f"{tab.base}/")
    tab.page.select_option("#noise", "independent")  # a second cold-store fit goes out (see independent_noise)
    seen = len(tab.smooth)  # cold-store fits are in flight now
    tab.page.select_option("#dataset", "parcel_depot")
    request, body = tab.settle(seen)
    demo = httpx.get(f"{tab.base}/v1/demo/parcel_depot", timeout=10.0).json()
    assert request["x"] == demo["x"]
    assert tab.attr("#data-points", "data-count") == str(len(demo["x"]))
    check_chart_matches(tab, request, body)
    assert float(tab.page.input_value("#bw-value")) == pytest.approx(body["bandwidth"]["value"], rel=1e-3)


def test_epoch_milliseconds_show_as_dates(tab: Page) -> None:
    open_page(tab)
    independent_noise(tab)
    seen = len(tab.smooth)
    tab.page.select_option("#dataset", "parcel_depot")
    request, body = tab.settle(seen)
    ax, bx, _, _ = check_chart_matches(tab, request, body)
    labels = tab.page.eval_on_selector_all(
        "#main-chart .axis-x .tick-label", "els => els.map(e => [e.textContent, +e.getAttribute('x')])"
    )
    assert len(labels) >= 3
    day_ms = 86_400_000
    for text, x in labels:
        value = (x - bx) / ax
        midnight = round(value / day_ms) * day_ms
        assert abs(value - midnight) < 60_000, (text, value)  # ticks fall on whole UTC days
        when = datetime.fromtimestamp(midnight / 1000, tz=UTC)
        assert text == f"{when.day} {when.strftime('%b')}", (text, when.isoformat())
    assert "UTC" in " ".join(tab.page.eval_on_selector_all("#main-chart .axis-title", "els => els.map(e => e.textContent)"))
