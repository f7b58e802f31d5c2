"""The HTML report in a real browser: headless Chromium (Debian's ``chromium`` package) at 1,280 and 390 px.

Checked, as a dispatcher would see the page: no horizontal overflow of the page at 1,280 px (nor on an A4
landscape print page); the caution on screen without scrolling; every segment's intensity and data status shown
as words, inside the viewport, with a text contrast of at least 4.5:1 (WCAG 2.1, success criterion 1.4.3, with
its relative-luminance formula); the unknown and partial statuses as words, not only as colour.

The browser is driven over the Chrome DevTools Protocol on a pipe (``--remote-debugging-pipe``; standard library
only, no driver to install). Without Chromium the tests fail in CI (``CI`` set) and are skipped elsewhere.
Run as a script, ``python tests/test_report_browser.py DIR`` writes screenshots of the demo report to DIR.
"""

from __future__ import annotations

import base64
import json
import os
import select
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))

BROWSERS = ("/usr/bin/chromium", "/usr/bin/chromium-browser", "/usr/bin/google-chrome")
WIDTHS = {"desktop": (1280, 800), "phone": (390, 844)}
TIMEOUT_S = 120  # for one reply of the browser (a page load included)
A4_LANDSCAPE_PX = 1047  # 297 mm - 2 x 10 mm margins (the page's @page rule) at 96 px per inch (CSS 2.1: 1in = 96px)


def find_browser():
    for b in (os.environ.get("ICING_BROWSER"), *BROWSERS, shutil.which("chromium")):
        if b and Path(b).exists():
            return b
    return None


class Browser:
    """Headless Chromium driven over the DevTools protocol on fds 3 (commands in) and 4 (replies out)."""

    def __init__(self, exe):
        r_cmd, self._w = os.pipe()
        self._r, w_out = os.pipe()
        self.profile = tempfile.mkdtemp(prefix="icing-browser-")

        def child():
            a, b = os.dup(r_cmd), os.dup(w_out)
            os.dup2(a, 3)
            os.dup2(b, 4)

        self.proc = subprocess.Popen(
            [exe, "--headless", "--no-sandbox", "--disable-gpu", "--remote-debugging-pipe", "--no-first-run",
             "--hide-scrollbars", f"--user-data-dir={self.profile}", "about:blank"],
            preexec_fn=child, close_fds=False, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL)
        os.close(r_cmd)
        os.close(w_out)
        self._buf, self._id = b"", 0
        target = self.call("Target.createTarget", {"url": "about:blank"})["targetId"]
        self.session = self.call("Target.attachToTarget", {"targetId": target, "flatten": True})["sessionId"]
        self.call("Page.enable", session=True)

    def _read(self, pred):
        while True:
            while b"\0" in self._buf:
                raw, self._buf = self._buf.split(b"\0", 1)
                msg = json.loads(raw)
                if pred(msg):
                    return msg
            ready, _, _ = select.select([self._r], [], [], TIMEOUT_S)
            if not ready:
                raise TimeoutError(f"no reply from the browser in {TIMEOUT_S} s")
            chunk = os.read(self._r, 1 << 20)
            if not chunk:
                raise RuntimeError("the browser closed the DevTools pipe")
            self._buf += chunk

    def call(self, method, params=None, session=False):
        self._id += 1
        msg = {"id": self._id, "method": method, "params": params or {}}
        if session:
            msg["sessionId"] = self.session
        os.write(self._w, json.dumps(msg).encode() + b"\0")
        reply = self._read(lambda m, i=self._id: m.get("id") == i)
        if "error" in reply:
            raise RuntimeError(f"{method}: {reply['error']}")
        return reply["result"]

    def open(self, path, width, height, media=""):
        self.call("Emulation.setDeviceMetricsOverride", {"width": width, "height": height, "deviceScaleFactor": 1,
                                                         "mobile": width < 600}, session=True)
        self.call("Emulation.setEmulatedMedia", {"media": media}, session=True)
        self.call("Page.navigate", {"url": Path(path).resolve().as_uri()}, session=True)
        self._read(lambda m: m.get("method") == "Page.loadEventFired")

    def evaluate(self, expression):
        r = self.call("Runtime.evaluate", {"expression": expression, "returnByValue": True}, session=True)
        if "exceptionDetails" in r:
            raise RuntimeError(r["exceptionDetails"])
        return r["result"]["value"]

    def screenshot(self, path, full_page=False):
        params = {"format": "png"}
        if full_page:
            h = self.evaluate("document.documentElement.scrollHeight")
            w = self.evaluate("innerWidth")
            params |= {"clip": {"x": 0, "y": 0, "width": w, "height": h, "scale": 1}, "captureBeyondViewport": True}
        Path(path).write_bytes(base64.b64decode(self.call("Page.captureScreenshot", params, session=True)["data"]))

    def close(self):
        try:
            self.call("Browser.close")
            self.proc.wait(timeout=20)
        except Exception:  # noqa: BLE001 - a browser that will not close is ended
            self.proc.kill()
        finally:
            os.close(self._w)
            os.close(self._r)
            shutil.rmtree(self.profile, ignore_errors=True)


# Measures the page: overflow, the caution's box, and each segment's status badges with their contrast.
MEASURE = r"""
(() => {
  const lum = (c) => {  // WCAG 2.1 relative luminance of an sRGB colour "rgb(r, g, b)"
    const v = c.match(/[\d.]+/g).slice(0, 3).map(Number).map(x => x / 255)
      .map(x => x <= 0.04045 ? x / 12.92 : Math.pow((x + 0.055) / 1.055, 2.4));
    return 0.2126 * v[0] + 0.7152 * v[1] + 0.0722 * v[2];
  };
  const background = (el) => {  // the first opaque background up the tree
    for (let e = el; e; e = e.parentElement) {
      const b = getComputedStyle(e).backgroundColor;
      const a = b.match(/[\d.]+/g);
      if (a && (a.length < 4 || Number(a[3]) > 0.5)) return b;
    }
    return "rgb(255, 255, 255)";
  };
  const box = (el) => {
    const r = el.getBoundingClientRect(), s = getComputedStyle(el);
    const fg = lum(s.color), bg = lum(background(el));
    return {text: el.innerText.trim(), left: r.left, right: r.right, top: r.top, bottom: r.bottom,
            width: r.width, height: r.height, visible: s.visibility === "visible" && s.display !== "none"
            && Number(s.opacity) > 0.9, contrast: (Math.max(fg, bg) + 0.05) / (Math.min(fg, bg) + 0.05)};
  };
  const rows = [...document.querySelectorAll("#segments tr.seg")].map(tr => ({
    segment: tr.dataset.segment, data: tr.dataset.data, intensity: tr.dataset.intensity,
    badges: [...tr.querySelectorAll("td.st .badge")].map(box)}));
  return {width: innerWidth, height: innerHeight, scrollWidth: document.documentElement.scrollWidth,
          caution: box(document.getElementById("caution")), rows: rows};
})()
"""


def demo_report(out):
    """The demo report as ``icing demo --out DIR`` writes it; returns the path of report.html."""
    from icing.cli import main

    rc = main(["demo", "--out", str(out)])
    assert rc == 0
    return Path(out) / "report.html"


def missing_report(out):
    """A report with a segment without data and one with partial data (typed as the new segment table)."""
    from test_report_tables import typed_assessment

    from icing.report.html import write_html

    return write_html(typed_assessment(), out)[0]


@pytest.fixture(scope="module")
def browser():
    exe = find_browser()
    if exe is None:
        msg = ("headless Chromium not found (apt-get install chromium, or set ICING_BROWSER): the HTML report "
               "cannot be checked in a browser")
        if os.environ.get("CI"):
            pytest.fail(msg + "; CI must have it (.ci/run installs it)")
        pytest.skip(msg + " (skipped outside CI)")
    b = Browser(exe)
    yield b
    b.close()


@pytest.fixture(scope="module")
def pages(tmp_path_factory):
    return {"demo": demo_report(tmp_path_factory.mktemp("demo")),
            "gaps": missing_report(tmp_path_factory.mktemp("gaps"))}


def measure(browser, page, width, height, media=""):
    browser.open(page, width, height, media)
    return browser.evaluate(MEASURE)


@pytest.mark.parametrize("name", ["demo", "gaps"])
def test_no_horizontal_overflow_at_1280(browser, pages, name):
    """The page is no wider than a 1,280 px window (the old table ran to 1,400 px)."""
    m = measure(browser, pages[name], *WIDTHS["desktop"])
    assert m["width"] == 1280
    assert m["scrollWidth"] <= m["width"], m["scrollWidth"]


@pytest.mark.parametrize("name", ["demo", "gaps"])
def test_print_fits_a4_landscape(browser, pages, name):
    """With print media at the width of an A4 landscape page inside the @page margins, nothing overflows."""
    m = measure(browser, pages[name], A4_LANDSCAPE_PX, 740, media="print")
    assert m["scrollWidth"] <= A4_LANDSCAPE_PX, m["scrollWidth"]


@pytest.mark.parametrize("size", list(WIDTHS))
@pytest.mark.parametrize("name", ["demo", "gaps"])
def test_caution_visible_without_scrolling(browser, pages, name, size):
    m = measure(browser, pages[name], *WIDTHS[size])
    c = m["caution"]
    assert c["visible"] and c["text"].startswith("ADVISORY ONLY")
    assert 0 <= c["top"] and c["bottom"] <= m["height"], c
    assert 0 <= c["left"] and c["right"] <= m["width"], c
    assert c["contrast"] >= 4.5


@pytest.mark.parametrize("size", list(WIDTHS))
@pytest.mark.parametrize("name", ["demo", "gaps"])
def test_every_status_is_visible_text(browser, pages, name, size):
    """Each segment shows its intensity and data status as words, on screen horizontally, readable (contrast
    at least 4.5:1, WCAG 2.1 SC 1.4.3); unknown reads UNKNOWN, partial keeps its word and a '*'."""
    m = measure(browser, pages[name], *WIDTHS[size])
    assert m["rows"], "no segment rows"
    for row in m["rows"]:
        inten, data = row["badges"]
        for b in (inten, data):
            assert b["visible"] and b["width"] > 0 and b["height"] > 0, (row["segment"], b)
            assert 0 <= b["left"] and b["right"] <= m["width"], (row["segment"], b)
            assert b["contrast"] >= 4.5, (row["segment"], b)
        assert data["text"].lower() == row["data"]
        if row["intensity"] == "unknown":
            assert inten["text"] == "UNKNOWN"
        else:
            assert inten["text"].lower().rstrip("*") == row["intensity"]
            assert inten["text"].endswith("*") == (row["data"] == "partial")
    if name == "gaps":
        assert {r["data"] for r in m["rows"]} == {"ok", "partial", "missing"}


def screenshots(out_dir):
    """Screenshots of the demo report at 1,280 and 390 px for the README."""
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    page = demo_report(Path(tempfile.mkdtemp(prefix="icing-demo-")))
    b = Browser(find_browser())
    try:
        for name, (w, h) in WIDTHS.items():
            b.open(page, w, h)
            b.screenshot(out_dir / f"report_{name}.png")
    finally:
        b.close()


if __name__ == "__main__":
    screenshots(sys.argv[1] if len(sys.argv) > 1 else "docs")
