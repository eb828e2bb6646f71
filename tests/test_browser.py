"""report.html in a real browser: headless Chromium renders it with no console error, no
network request, every image decoded, and screenshots that are not blank.

Chromium is driven through its DevTools protocol over ``--remote-debugging-pipe`` (JSON
messages separated by NUL bytes on file descriptors 3 and 4), with the standard library
only. The test skips, saying why, where Debian's ``chromium`` package is not installed
(.ci/run installs it).

Screenshots are left in the test's temporary folder (``report_top.png``,
``report_full.png``) for a person to look at.
"""

import io
import json
import os
import select
import shutil
import subprocess
import time
from pathlib import Path

import numpy as np
import pytest
from PIL import Image

from slopescreen.cli import main
from slopescreen.report.cautions import SHORT

from test_report import write_case

CHROMIUM = "/usr/bin/chromium" if Path("/usr/bin/chromium").exists() else shutil.which("chromium")

pytestmark = pytest.mark.skipif(
    CHROMIUM is None or os.name != "posix",
    reason="headless Chromium is not installed (Debian package 'chromium' at /usr/bin/chromium; "
           ".ci/run installs it with apt-get)")

FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--hide-scrollbars", "--mute-audio", "--remote-debugging-pipe"]


class Browser:
    """A headless Chromium with one page, spoken to over the DevTools pipe."""

    def __init__(self, profile: Path, timeout_s=60.0):
        to_child_r, self._to_child = os.pipe()
        self._from_child, from_child_w = os.pipe()

        def wire():  # in the child: commands on fd 3, replies on fd 4
            os.dup2(to_child_r, 3)
            os.dup2(from_child_w, 4)

        self.proc = subprocess.Popen([CHROMIUM, *FLAGS, f"--user-data-dir={profile}"],
                                     pass_fds=(3, 4), preexec_fn=wire, stdin=subprocess.DEVNULL,
                                     stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        os.close(to_child_r)
        os.close(from_child_w)
        self.timeout_s = timeout_s
        self._buf = b""
        self._next = 0
        self.events = []
        target = self.call("Target.createTarget", url="about:blank")["targetId"]
        self.session = self.call("Target.attachToTarget", targetId=target, flatten=True)["sessionId"]

    def _send(self, method, params, session=None):
        self._next += 1
        msg = {"id": self._next, "method": method, "params": params}
        if session:
            msg["sessionId"] = session
        os.write(self._to_child, json.dumps(msg).encode() + b"\0")
        return self._next

    def _read(self, deadline):
        while b"\0" not in self._buf:
            left = deadline - time.monotonic()
            if left <= 0:
                raise TimeoutError("no answer from Chromium")
            ready, _, _ = select.select([self._from_child], [], [], left)
            if ready:
                chunk = os.read(self._from_child, 1 << 20)
                if not chunk:
                    raise RuntimeError("Chromium closed the DevTools pipe")
                self._buf += chunk
        raw, self._buf = self._buf.split(b"\0", 1)
        return json.loads(raw)

    def call(self, method, session=None, **params):
        """Send a command and wait for its result; events seen meanwhile are kept."""
        wanted = self._send(method, params, session)
        deadline = time.monotonic() + self.timeout_s
        while True:
            msg = self._read(deadline)
            if msg.get("id") == wanted:
                if "error" in msg:
                    raise RuntimeError(f"{method}: {msg['error']}")
                return msg.get("result", {})
            self.events.append(msg)

    def page(self, method, **params):
        return self.call(method, self.session, **params)

    def wait_event(self, method):
        deadline = time.monotonic() + self.timeout_s
        for msg in self.events:
            if msg.get("method") == method:
                return msg
        while True:
            msg = self._read(deadline)
            self.events.append(msg)
            if msg.get("method") == method:
                return msg

    def load(self, page: Path, width=1200, height=900):
        """Open a file in the page at a fixed size, with console, log and network events on."""
        for domain in ("Runtime", "Log", "Page", "Network"):
            self.page(f"{domain}.enable")
        self.page("Emulation.setDeviceMetricsOverride", width=width, height=height,
                  deviceScaleFactor=1, mobile=False)
        self.page("Page.navigate", url=page.as_uri())
        self.wait_event("Page.loadEventFired")

    def close(self):
        try:
            self.call("Browser.close")
        except Exception:
            pass
        try:
            self.proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        for fd in (self._to_child, self._from_child):
            try:
                os.close(fd)
            except OSError:
                pass


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    folder = tmp_path_factory.mktemp("browser")
    path = write_case(folder)
    assert main(["-q", "run", str(path)]) == 0
    return folder, folder / "out" / "report.html"


@pytest.fixture(scope="module")
def rendered(report):
    folder, page = report
    b = Browser(folder / "profile")
    try:
        b.load(page)
        images = json.loads(b.page("Runtime.evaluate", returnByValue=True, expression=(
            "JSON.stringify(Array.from(document.images).map(i => "
            "({complete: i.complete, w: i.naturalWidth, h: i.naturalHeight, alt: i.alt})))"))["result"]["value"])
        top = b.page("Page.captureScreenshot", format="png")["data"]
        size = b.page("Page.getLayoutMetrics")["cssContentSize"]
        full = b.page("Page.captureScreenshot", format="png", captureBeyondViewport=True,
                      clip={"x": 0, "y": 0, "width": size["width"], "height": size["height"], "scale": 0.5})["data"]
        events = list(b.events)
    finally:
        b.close()
    import base64

    shots = {}
    for name, data in (("top", top), ("full", full)):
        png = base64.b64decode(data)
        (folder / f"report_{name}.png").write_bytes(png)
        shots[name] = Image.open(io.BytesIO(png)).convert("RGB")
    return {"images": images, "events": events, "shots": shots, "height": size["height"]}


def _problems(events):
    """Exceptions, console errors and warnings, failed loads among DevTools events."""
    problems = []
    for ev in events:
        method, params = ev.get("method"), ev.get("params", {})
        if method == "Runtime.exceptionThrown":
            problems.append(params)
        elif method == "Runtime.consoleAPICalled" and params.get("type") in ("error", "assert", "warning"):
            problems.append(params)
        elif method == "Log.entryAdded" and params["entry"]["level"] in ("error", "warning"):
            problems.append(params["entry"])
        elif method == "Network.loadingFailed":
            problems.append(params)
    return problems


def test_page_loads_without_console_errors(rendered):
    assert _problems(rendered["events"]) == []


def test_page_fetches_nothing_from_the_network(rendered):
    urls = [ev["params"]["request"]["url"] for ev in rendered["events"]
            if ev.get("method") == "Network.requestWillBeSent"]
    assert urls, "the page load itself should be seen"
    assert all(u.startswith(("file:", "data:")) for u in urls), urls


def test_every_image_decodes(rendered):
    images = rendered["images"]
    assert len(images) >= 6
    for im in images:
        assert im["complete"] and im["w"] > 0 and im["h"] > 0, im
        assert im["alt"].startswith(("Map", "Chart"))


def test_screenshots_are_not_blank(rendered):
    top = np.asarray(rendered["shots"]["top"], dtype=np.float64)
    full = np.asarray(rendered["shots"]["full"], dtype=np.float64)
    for img in (top, full):
        assert img.std() > 20.0                                     # not a flat page
        assert np.mean(img.min(axis=2) < 200) > 0.03                # some ink on it
    assert rendered["height"] > 5000                               # maps and tables laid out
    # the caution banner is on the first screen: its dark red (#8a1c1c) fills a band of pixels
    red = (np.abs(top[..., 0] - 0x8A) < 12) & (np.abs(top[..., 1] - 0x1C) < 12) & (np.abs(top[..., 2] - 0x1C) < 12)
    assert red.sum() > 5000


# ---------------------------------------------------------------------------
# The pan-and-zoom map
# ---------------------------------------------------------------------------


def _evaluate(b, expression):
    """The value of a JavaScript expression on the page (promises awaited)."""
    got = b.page("Runtime.evaluate", expression=expression, returnByValue=True, awaitPromise=True)
    if "exceptionDetails" in got:
        raise RuntimeError(f"{expression}: {got['exceptionDetails']}")
    return got["result"].get("value")


def _next_frame(b):
    _evaluate(b, "new Promise(r => requestAnimationFrame(() => requestAnimationFrame(() => r(1))))")


def _mouse(b, kind, x, y, **kw):
    b.page("Input.dispatchMouseEvent", type=kind, x=float(x), y=float(y), **kw)


def _chosen_cell(out, manifest):
    """A cell of the first rain case with a middling FS (not the cap), from the GeoTIFF."""
    import rasterio

    first = manifest["rain"][0]["name"]
    [entry] = [p for p in manifest["products"]
               if p["key"] == "factor_of_safety" and p["rain"] == first and p["kind"] == "raster"]
    with rasterio.open(out / entry["path"]) as src:       # read back independently of the report
        fs = src.read(1, masked=True).filled(np.nan).astype(np.float64)
    score = np.where(np.isfinite(fs), np.abs(fs - 1.17), np.inf)
    score[:3], score[-3:], score[:, :3], score[:, -3:] = np.inf, np.inf, np.inf, np.inf
    row, col = np.unravel_index(np.argmin(score), fs.shape)
    return first, int(row), int(col), float(fs[row, col])


@pytest.fixture(scope="module")
def explored(report):
    folder, page = report
    out = page.parent
    manifest = json.loads((out / "manifest.json").read_text())
    rain, row, col, fs_tif = _chosen_cell(out, manifest)
    b = Browser(folder / "profile-explorer")
    try:
        b.load(page)
        _evaluate(b, "window.slopescreenExplorer.ready.then(() => 1)")
        _evaluate(b, "document.getElementById('ex-map').scrollIntoView({block: 'center'}), 1")
        _next_frame(b)
        rect = _evaluate(b, "(() => { const r = document.getElementById('ex-canvas')"
                            ".getBoundingClientRect(); return [r.left, r.top, r.width, r.height]; })()")
        cx, cy = rect[0] + rect[2] * 0.4, rect[1] + rect[3] * 0.45
        # a click on the chosen cell, the whole area in view
        at = _evaluate(b, f"window.slopescreenExplorer.screenOf({row}, {col})")
        inside = rect[0] < at["x"] < rect[0] + rect[2] and rect[1] < at["y"] < rect[1] + rect[3] - 40
        _mouse(b, "mousePressed", at["x"], at["y"], button="left", buttons=1, clickCount=1)
        _mouse(b, "mouseReleased", at["x"], at["y"], button="left", buttons=0, clickCount=1)
        _evaluate(b, "new Promise((ok, no) => { const p = document.getElementById('ex-popup'); "
                     "const end = Date.now() + 20000; const t = () => !p.hidden ? ok(1) : "
                     "Date.now() > end ? no(new Error('no popup')) : setTimeout(t, 20); t(); })")
        shown = _evaluate(b, "Array.from(document.querySelectorAll('#ex-popup tr')).map(tr => "
                             "[tr.getAttribute('data-value'), tr.getAttribute('data-rain'), "
                             "tr.querySelector('td').textContent])")
        note = _evaluate(b, "document.getElementById('ex-popup').textContent")
        scroll = _evaluate(b, "[window.scrollX, window.scrollY]")   # a clip is in page units
        shot = b.page("Page.captureScreenshot", format="png", clip={
            "x": rect[0] + scroll[0], "y": rect[1] + scroll[1], "width": rect[2],
            "height": rect[3], "scale": 1})["data"]
        _evaluate(b, "document.querySelector('#ex-popup button').click(), 1")   # close it
        # zoom with the wheel, then pan with a drag
        view0 = _evaluate(b, "window.slopescreenExplorer.view()")
        _mouse(b, "mouseWheel", cx, cy, deltaX=0, deltaY=-300)
        _next_frame(b)
        view1 = _evaluate(b, "window.slopescreenExplorer.view()")
        attr1 = _evaluate(b, "document.getElementById('ex-map').getAttribute('data-view')")
        _mouse(b, "mousePressed", cx, cy, button="left", buttons=1, clickCount=1)
        for i in range(1, 6):
            _mouse(b, "mouseMoved", cx + 16 * i, cy + 10 * i, button="left", buttons=1)
        _mouse(b, "mouseReleased", cx + 80, cy + 50, button="left", buttons=0, clickCount=1)
        _next_frame(b)
        view2 = _evaluate(b, "window.slopescreenExplorer.view()")
        popup_after_drag = _evaluate(b, "document.getElementById('ex-popup').hidden")
        caution = _evaluate(b, "document.querySelector('#ex-map .ex-caution').textContent")
        layers = _evaluate(b, "window.slopescreenExplorer.layers()")
        events = list(b.events)
    finally:
        b.close()
    import base64

    png = base64.b64decode(shot)
    (folder / "explorer_map.png").write_bytes(png)
    return {"views": (view0, view1, view2), "attr1": attr1, "popup_after_drag": popup_after_drag,
            "inside": inside, "shown": shown, "note": note, "caution": caution, "rain": rain,
            "fs_tif": fs_tif, "events": events, "layers": layers, "manifest": manifest,
            "shot": Image.open(io.BytesIO(png)).convert("RGB"), "page": page}


def test_map_loads_without_console_errors_or_requests(explored):
    assert _problems(explored["events"]) == []
    urls = [ev["params"]["request"]["url"] for ev in explored["events"]
            if ev.get("method") == "Network.requestWillBeSent"]
    page = explored["page"].as_uri()
    assert urls and urls[0] == page
    # nothing but the page itself and the report's own embedded images; no blob or web address
    assert all(u == page or u.startswith("data:image/png;base64,") for u in urls), urls
    assert not any(ev.get("method", "").startswith("Network.webSocket") for ev in explored["events"])


def test_wheel_zooms_about_the_pointer_and_drag_pans(explored):
    v0, v1, v2 = explored["views"]
    assert v1["s"] > v0["s"] * 1.2                                # zoomed in
    assert explored["attr1"].split()[0] == f"{v1['s']:.6f}"       # the drawn view is the new one
    assert v2["s"] == v1["s"]                                     # a drag does not zoom
    assert v2["tx"] - v1["tx"] == pytest.approx(80.0, abs=1.0)
    assert v2["ty"] - v1["ty"] == pytest.approx(50.0, abs=1.0)
    assert explored["popup_after_drag"] is True                   # a drag is not a click


def test_a_click_shows_the_cells_values_within_rounding(explored):
    assert explored["inside"]
    rows = explored["shown"]
    [fs] = [text for kind, rain, text in rows if kind == "fs" and rain == explored["rain"]]
    # FS is truncated to 0.01 on the page: never above the GeoTIFF's value, less than 0.01 below
    assert 0.0 <= explored["fs_tif"] - float(fs) < 0.01 + 1e-6
    kinds = {kind for kind, _, _ in rows}
    assert {"fs", "pf", "soil", "slope", "segment"} <= kinds
    assert "truncated to 0.01" in explored["note"] and "0.001" in explored["note"]
    assert "E 5000" in explored["note"] and "N 5099" in explored["note"]   # map coordinates


def test_map_shows_every_mapped_product_and_the_caution(explored):
    manifest = explored["manifest"]
    from slopescreen.products import STYLES

    mapped = {f"{p['key']}|{p['rain'] or ''}" for p in manifest["products"]
              if p["kind"] == "raster" and p["key"] in STYLES}
    assert set(explored["layers"]) == mapped
    assert explored["caution"] == SHORT
    img = np.asarray(explored["shot"], dtype=np.float64)
    assert img.std() > 20.0                                        # terrain and colours drawn
    red = (np.abs(img[..., 0] - 0x8A) < 20) & (np.abs(img[..., 1] - 0x1C) < 20)
    assert red.sum() > 2000                                        # the caution band on the map
