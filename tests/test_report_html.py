"""The HTML report: parses as HTML, embeds its images, caution first, every segment, no network reference."""

from __future__ import annotations

import base64
import io
import re
from html.parser import HTMLParser

import numpy as np
import pytest
from PIL import Image
from pyproj import Geod
from test_report_plots import GapSource, expected_size, synthetic_assessment

from icing import CAUTION
from icing.report.files import write_reports
from icing.report.html import report_html, write_html

VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # ISO/IEC 15948


class StrictParser(HTMLParser):
    """Checks that every non-void element is closed in order (HTML Living Standard, 13.1.2) and collects
    the document's text, images, URL attributes, table rows and the order of the first elements in body."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack, self.errors, self.images, self.urls, self.rows = [], [], [], [], []
        self.body_children, self.text, self.doctype = [], [], None

    def handle_decl(self, decl):
        self.doctype = decl

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if self.stack and self.stack[-1] == "body":
            self.body_children.append((tag, a.get("class", "")))
        for k in ("src", "href", "action", "data", "poster"):
            if k in a:
                self.urls.append(a[k])
        if tag == "img":
            self.images.append(a)
        if tag == "tr" and "data-segment" in a:
            self.rows.append([a["data-segment"], a.get("data-data", "")])
        if tag not in VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if tag in VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1] if self.stack else 'nothing'}")
            return
        self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)
        if self.rows and "tr" in self.stack:
            self.rows[-1].append(data)


def parse(text):
    p = StrictParser()
    p.feed(text)
    p.close()
    return p


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    a = synthetic_assessment()
    out = tmp_path_factory.mktemp("html")
    paths = write_html(a, out)
    return a, out, paths, (out / "report.html").read_text(encoding="utf-8")


def test_report_files_written(report):
    _, out, paths, _ = report
    assert paths[0] == out / "report.html"
    assert {p.name for p in paths[1:]} == {"cross_section.png", "segment_chart.png"}
    for p in paths[1:]:
        assert p.read_bytes()[:8] == PNG_SIGNATURE


def test_report_parses_as_html(report):
    _, _, _, text = report
    p = parse(text)
    assert p.doctype is not None and p.doctype.lower() == "doctype html"
    assert p.errors == []
    assert p.stack == []  # everything opened was closed
    assert re.search(r'<meta charset="utf-8">', text)


def test_report_is_self_contained(report):
    """No URL other than embedded data: nothing is fetched from the network or the disk."""
    _, _, _, text = report
    p = parse(text)
    assert p.urls and all(u.startswith("data:image/png;base64,") for u in p.urls)
    assert "http://" not in text and "https://" not in text
    assert "<script" not in text and "<link" not in text and "@import" not in text and "url(" not in text


def test_report_embeds_its_images(report):
    """Each image decodes to the PNG written beside the report (same bytes, expected pixel size)."""
    _, out, _, text = report
    p = parse(text)
    assert len(p.images) == 2
    written = {(out / n).read_bytes() for n in ("cross_section.png", "segment_chart.png")}
    sizes = set()
    for img in p.images:
        raw = base64.b64decode(img["src"].split(",", 1)[1], validate=True)
        assert raw[:8] == PNG_SIGNATURE
        assert raw in written
        sizes.add(Image.open(io.BytesIO(raw)).size)
        assert img.get("alt")
    assert sizes == {expected_size("cross_section"), expected_size("segments")}


def test_report_caution_at_the_top_and_bottom(report):
    a, _, _, text = report
    p = parse(text)
    assert p.body_children[0] == ("p", "caution")
    whole = " ".join(" ".join(p.text).split())
    assert whole.count(CAUTION) == 2
    assert whole.index(CAUTION) < whole.index("Summary")


def test_report_has_every_segment_and_the_gap_notice(report):
    a, _, _, text = report
    p = parse(text)
    assert [int(r[0]) for r in p.rows] == a.segments["segment"].tolist()
    for r, seg in zip(p.rows, a.segments.itertuples(), strict=True):
        assert r[1] == seg.data
        assert seg.start in r and seg.end in r
        assert seg.intensity in [x.strip().lower().rstrip("*") for x in r]
    whole = " ".join(p.text)
    assert "DATA GAPS" in whole and "UNKNOWN" in whole
    for label in ("X1 2030-02-01 00Z", "X2 2030-02-01 00Z"):
        assert label in whole


class LabelledSource(GapSource):
    """GapSource with two reports at known places and times, as the sources table reads them."""

    labels = np.array(["X1 2030-02-01 00Z", "X2 2030-02-01 00Z"])
    station = np.array(["X1", "X2"])
    latitude = np.array([51.0, 49.5])
    longitude = np.array([-29.0, -25.0])
    time_s = np.array([np.datetime64("2030-02-01T00:00:00", "s").astype(int)] * 2, dtype=float)
    profiles = {}


def test_sources_table_distance_and_age():
    """Nearest distance from each report to the flight path within 0.5 % of the WGS84 geodesic (pyproj), and the
    age from the nearest flight time, in hours."""
    a = synthetic_assessment()
    src = LabelledSource()
    text = report_html(a, {}, src)  # the page without its figures (those are tested above)
    assert parse(text).errors == []
    table = text[text.index('<table id="sources">'):]
    rows = re.findall(r"<tr><td class=\"t\">([^<]+)</td><td class=\"t\">([^<]*)</td><td>([^<]+)</td>"
                      r"<td>([^<]+)</td>", table)
    assert [r[0] for r in rows] == list(src.labels)
    smp = a.samples
    geod = Geod(ellps="WGS84")
    for (_, _, dist, age), lat, lon in zip(rows, src.latitude, src.longitude, strict=True):
        _, _, d = geod.inv(np.full(len(smp), lon), np.full(len(smp), lat), smp["longitude"], smp["latitude"])
        np.testing.assert_allclose(float(dist), d.min() / 1000.0, rtol=5e-3)
        hours = (smp["time_s"].min() - src.time_s[0]) / 3600.0
        np.testing.assert_allclose(float(age), hours, rtol=0.01)
    assert rows[0][1] == "1, 2" and rows[1][1] == "1, 2, 3"


def test_write_reports_includes_the_html(tmp_path):
    """icing.report.files.write_reports picks up report.html and its images."""
    paths = write_reports(synthetic_assessment(), tmp_path)
    names = {p.name for p in paths}
    assert {"segments.csv", "assessment.json", "segments.geojson", "report.html", "cross_section.png"} <= names


class GridLikeSource(GapSource):
    """A stand-in model grid: one label per time, grid coordinates of another shape than the labels."""

    kind = "model"
    labels = np.array(["model 2030-02-01 06Z", "model 2030-02-01 09Z"])
    latitude = np.linspace(40.0, 60.0, 5)
    longitude = np.linspace(-40.0, -10.0, 7)
    time_s = np.array([np.datetime64(f"2030-02-01T{h}:00:00", "s").astype(int) for h in ("06", "09")], dtype=float)


def test_sources_table_for_a_model_grid():
    """A grid source gives one row per time with its age from the nearest flight time; no per-station plots."""
    a = synthetic_assessment()
    src = GridLikeSource()
    text = report_html(a, {}, src)
    assert parse(text).errors == []
    table = text[text.index('<table id="sources">'):]
    rows = re.findall(r"<tr><td class=\"t\">([^<]+)</td><td class=\"t\">[^<]*</td><td>([^<]+)</td>"
                      r"<td>([^<]+)</td>", table)
    assert [r[0] for r in rows] == list(src.labels)
    ts = a.samples["time_s"].to_numpy()
    for (_, dist, age), t in zip(rows, src.time_s, strict=True):
        assert dist == "–"  # no station distance for a grid
        # shown to a tenth of an hour (half a tenth of rounding)
        np.testing.assert_allclose(float(age), np.abs(ts - t).min() / 3600.0, rtol=0.01, atol=0.051)


def test_compact_table_with_folded_details(report):
    """Issue 17: the segment table keeps to where/when/how bad/how sure; sources, envelopes, distances and ages
    of the data and the best altitude fold into one <details> per segment; a print style for a landscape page."""
    a, _, _, text = report
    table = text[text.index('<table id="segments">'):text.index("</table>", text.index('<table id="segments">'))]
    head = table[:table.index("</thead>")]
    assert "sources" not in head and "reports used" not in head
    assert table.count("<details>") == len(a.segments)
    for word in ("reports used", "14 CFR 25 Appendix C", "farthest data used (km)", "oldest data used (h)",
                 "best altitude (ft)"):
        assert table.count(f"<dt>{word}</dt>") == len(a.segments), word
    assert "@media print" in text and re.search(r"@page\{size:landscape", text)


def test_unknown_details_read_unknown():
    """A segment without data: its details say 'unknown' (never blank or 0), its intensity UNKNOWN, its data
    MISSING; the new dtypes (datetime64 UTC times, ordered Categoricals) render."""
    from test_report_tables import typed_assessment

    a = typed_assessment()
    text = report_html(a, {})
    assert parse(text).errors == []
    row = text[text.index('data-segment="2"'):text.index('data-segment="3"')]
    assert "UNKNOWN" in row and "MISSING" in row and "06:31–07:02" in row
    assert "<dt>max LWC (g/m³)</dt><dd>unknown</dd>" in row
    assert "<dt>ice type</dt>" not in row  # shown in the row itself
    assert ">unknown</td>" in row  # ice type cell
    assert 'data-label="minutes in icing">unknown<' in row and 'data-label="accretion mm">unknown<' in row
    assert "DATA GAPS: 1 segment(s) without data and 1 with partial data" in text  # counted from the table
    assert "1 segment unknown" in text  # beside the worst intensity
