"""The report's pan-and-zoom map: what it adds to report.html and how fast a browser shows it.

Usage::

    python benchmarks/bench_explorer.py REPORT.html [--shot PATH]

What it measures and how
------------------------
Size
    The bytes of ``REPORT.html``, of the map's JSON element (``#ex-data``) and of the map's
    script, and per embedded array the base64 PNG, in bytes per embedded cell.
Browser
    Headless Chromium (``/usr/bin/chromium``) driven over the DevTools pipe with the
    ``Browser`` class of ``tests/test_browser.py``, window 1200 x 900: the time from
    navigation to the load event, then to ``slopescreenExplorer.ready`` (the hillshade and the
    first layer decoded and painted), the time to switch to each other layer (decode, colour,
    draw) and the time from a click to the value popup (every value array decoded on the
    first click). Wall clock in this process, median of ``--repeat`` page loads.
``--shot PATH``
    A screenshot of the map after the load (for a person to look at).

No timing is asserted anywhere.
"""

import argparse
import base64
import json
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from test_browser import Browser  # noqa: E402


def _sizes(text: str) -> dict:
    start = text.index('<script type="application/json" id="ex-data">')
    body = text[start:].split(">", 1)[1]
    data_text = body.split("</script>", 1)[0]
    script = body.split("</script>", 1)[1].split("<script>", 1)[1].split("</script>", 1)[0]
    data = json.loads(data_text)
    cells = data["grid"]["rows"] * data["grid"]["cols"]
    arrays = {}
    for aid, a in data["arrays"].items():
        arrays[aid] = (a["key"], len(a["png"]))
    return {"data": len(data_text.encode()), "script": len(script.encode()), "cells": cells,
            "arrays": arrays, "shade": len(data["shade"]), "grid": data["grid"],
            "layers": data["layers"]}


def _evaluate(b, expression):
    got = b.page("Runtime.evaluate", expression=expression, returnByValue=True, awaitPromise=True)
    if "exceptionDetails" in got:
        raise RuntimeError(f"{expression}: {got['exceptionDetails']}")
    return got["result"].get("value")


def _one_load(page: Path, profile: Path, shot: Path | None):
    b = Browser(profile, timeout_s=300.0)
    try:
        t0 = time.perf_counter()
        b.load(page)
        loaded = time.perf_counter() - t0
        _evaluate(b, "window.slopescreenExplorer.ready.then(() => 1)")
        ready = time.perf_counter() - t0
        switches = {}
        for name in _evaluate(b, "window.slopescreenExplorer.layers()"):
            key, rain = name.split("|")
            t = time.perf_counter()
            _evaluate(b, f"window.slopescreenExplorer.select({json.dumps(key)}, "
                         f"{json.dumps(rain or None)}).then(() => new Promise(r => "
                         "requestAnimationFrame(() => r(1))))")
            switches[name] = time.perf_counter() - t
        _evaluate(b, "window.slopescreenExplorer.select('factor_of_safety', "
                     "window.slopescreenExplorer.layers().filter(n => "
                     "n.startsWith('factor_of_safety|'))[0].split('|')[1] || null)")
        _evaluate(b, "document.getElementById('ex-map').scrollIntoView({block: 'center'}), 1")
        g = _evaluate(b, "window.slopescreenExplorer.grid")
        at = _evaluate(b, f"window.slopescreenExplorer.screenOf({g['rows'] // 2}, {g['cols'] // 2})")
        t = time.perf_counter()
        for kind, buttons in (("mousePressed", 1), ("mouseReleased", 0)):
            b.page("Input.dispatchMouseEvent", type=kind, x=at["x"], y=at["y"], button="left",
                   buttons=buttons, clickCount=1)
        _evaluate(b, "new Promise(r => { const p = document.getElementById('ex-popup'); "
                     "const t = () => p.hidden ? setTimeout(t, 5) : r(1); t(); })")
        click = time.perf_counter() - t
        if shot is not None:
            rect = _evaluate(b, "(() => { const r = document.getElementById('ex-map')"
                                ".getBoundingClientRect(); return [r.left + scrollX, "
                                "r.top + scrollY, r.width + 300, r.height]; })()")
            png = b.page("Page.captureScreenshot", format="png", clip={
                "x": rect[0], "y": rect[1], "width": rect[2], "height": rect[3],
                "scale": 1})["data"]
            shot.write_bytes(base64.b64decode(png))
    finally:
        b.close()
    return loaded, ready, switches, click


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("report", type=Path)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--shot", type=Path)
    args = ap.parse_args(argv)
    page = args.report.resolve()
    text = page.read_text(encoding="utf-8")
    s = _sizes(text)
    g = s["grid"]
    print(f"{page.name}: {len(text.encode()) / 1e6:.2f} MB; map data {s['data'] / 1e6:.2f} MB, "
          f"script {s['script'] / 1e3:.1f} kB")
    print(f"grid {g['full_rows']} x {g['full_cols']}, embedded {g['rows']} x {g['cols']} = "
          f"{s['cells']:,} cells (blocks of {g['k']} x {g['k']})")
    print(f"  hillshade                       {s['shade'] / 1e6:6.2f} MB  "
          f"{s['shade'] / s['cells']:.2f} B/cell")
    for aid, (key, n) in s["arrays"].items():
        print(f"  {aid:>4} {key:26s} {n / 1e6:6.2f} MB  {n / s['cells']:.2f} B/cell")
    loads = []
    with tempfile.TemporaryDirectory() as tmp:
        for i in range(max(1, args.repeat)):
            loads.append(_one_load(page, Path(tmp) / f"p{i}", args.shot if i == 0 else None))
    med = statistics.median
    print(f"browser: load event {med(x[0] for x in loads):.2f} s, map ready "
          f"{med(x[1] for x in loads):.2f} s, first click to popup {med(x[3] for x in loads):.2f} s "
          f"(median of {len(loads)})")
    for name in loads[0][2]:
        print(f"  switch to {name:40s} {med(x[2][name] for x in loads):.3f} s")


if __name__ == "__main__":
    main()
