"""The run page and the model page without a browser: the HTML parses cleanly by the WHATWG rules
(html5lib) and round-trips through the standard library's parser, its pictures decode with Pillow, and
its figures count what the scoreboard counted. The browser test is tests/test_page_browser.py."""

from __future__ import annotations

import base64
import io
import json
from html.parser import HTMLParser
from pathlib import Path

import html5lib
import numpy as np
import pytest

from conftest import pack_capture
from PIL import Image

from vkit.check.scoreboard import score
from vkit.core.errors import ConfigError
from vkit.model.pipeline import preset, run_model
from vkit.report.quality import write_model_report
from vkit.report import page
from vkit.report.figures import mismatches_per_line
from vkit.report.page import write_index, write_model_page
from vkit.report.writers import case_entry, write_case_report, write_run_report
from vkit.video.capture import UNKNOWN
from vkit.video.patterns import box, checkerboard

H, W = 24, 32
FAIL_ID = "blur_core/model/box/32x24"
PASS_ID = 'blur_core/model/<b>checker</b> & "quotes"'  # must come out escaped, never as markup

# HTML void elements take no end tag (WHATWG HTML, "void elements"): common practice, no source needed.
VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}


def _coverage(result):
    stages = [{"stage": n, "lo": s.lo, "hi": s.hi, "seen_min": int(s.array.min()), "seen_max": int(s.array.max()),
               "share": (int(s.array.max()) - int(s.array.min())) / max(1, s.hi - s.lo)}
              for n, s in result.stages.items()]
    return {"stages": stages, "clamp_shares": {}, "border_share": 0.0, "floor": 0.5,
            "warnings": ["a warning in words"]}


def _case(out, case_id, verdict, expected, capture, meta):
    files = write_case_report(case_id, verdict, expected, capture, out, meta=meta, pictures="all")
    return case_entry(case_id, verdict, simulator="model", files=files, coverage=_coverage(expected[0]), meta=meta)


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory):
    """A report folder as a run writes it: one failing case (two frames) and one passing case."""
    out = tmp_path_factory.mktemp("run")
    spec = preset("blur")
    r = run_model(spec, box(H, W))
    bad = r.output.copy()
    bad[10:14, 20:24] = (bad[10:14, 20:24] + 60) % 256  # a defect in one 4x4 block
    bad[2, 2] = UNKNOWN
    cap = pack_capture([r.output, bad], rows={5: list(bad[5, :28])})  # line 5 of each frame loses 4 pixels
    failing = score([r, r], cap)
    meta = {"design": "blur_core", "stimulus": "box", "timing": "32x24", "path": "model", "seconds": 1.25,
            "rerun": "vkit run cfg.toml --only 'blur_core/model/box/32x24'", "expect": "pass"}
    rp = run_model(spec, checkerboard(H, W))
    passing = score([rp], pack_capture([rp.output]))
    cases = [_case(out, FAIL_ID, failing, [r, r], cap, meta),
             _case(out, PASS_ID, passing, [rp], pack_capture([rp.output]), {**meta, "stimulus": "checkerboard"})]
    write_run_report(cases, out)
    return out


class _Collector(HTMLParser):
    """Checks that every non-void element is closed in order, and collects what the tests ask about."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.errors: list[str] = []
        self.rows: list[dict[str, str | None]] = []
        self.images: list[dict[str, str | None]] = []
        self.scripts_with_src = 0
        self.stylesheets = 0
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "tr" and a.get("class") == "case":
            self.rows.append(a)
        if tag == "img":
            self.images.append(a)
        self.scripts_with_src += tag == "script" and "src" in a
        self.stylesheets += tag == "link" and a.get("rel") == "stylesheet"
        if tag not in VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.handle_starttag(tag, attrs)
        if tag not in VOID:
            self.stack.pop()

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes <{self.stack[-1] if self.stack else 'nothing'}>")
            return
        self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)


def _parse(path: Path) -> _Collector:
    text = path.read_text(encoding="utf-8")
    html5lib.HTMLParser(strict=True).parse(text)  # raises ParseError on any WHATWG parse error
    c = _Collector()
    c.feed(text)
    c.close()
    assert not c.errors and not c.stack, (c.errors, c.stack)
    return c


def _decode(src: str) -> Image.Image:
    head, data = src.split(",", 1)
    assert head == "data:image/png;base64"
    return Image.open(io.BytesIO(base64.b64decode(data)))


def test_run_page_parses_cleanly_and_is_self_contained(run_dir):
    c = _parse(write_index(run_dir))
    assert len(c.rows) == 2 and sorted(r["data-status"] for r in c.rows) == ["fail", "pass"]
    assert c.scripts_with_src == 0 and c.stylesheets == 0  # styles and script travel inside the page
    html = (run_dir / "index.html").read_text()
    assert "http://" not in html and "https://" not in html  # nothing fetched from the network
    assert PASS_ID in "".join(c.text)  # the id shows as text ...
    assert "<b>checker</b>" not in html  # ... and never as markup


def test_failing_picture_is_the_composite_at_its_size(run_dir):
    c = _parse(write_index(run_dir))
    report = json.loads((run_dir / "report.json").read_text())
    fail = next(x for x in report["cases"] if x["id"] == FAIL_ID)
    first = min(fail["files"]["frames"], key=int)
    with Image.open(run_dir / fail["files"]["frames"][first]["composite"]) as im:
        size = im.size
    shown = [i for i in c.images if i.get("alt", "").endswith(FAIL_ID)]
    assert len(shown) == 1
    pic = _decode(shown[0]["src"])
    assert pic.size == size == (int(shown[0]["width"]), int(shown[0]["height"]))
    assert size[0] <= page.FAIL_PICTURE_WIDTH


def test_lines_chart_counts_what_the_scoreboard_counted(run_dir):
    report = json.loads((run_dir / "report.json").read_text())
    fail = next(x for x in report["cases"] if x["id"] == FAIL_ID)
    for per in fail["verdict"]["per_frame"]:
        lines = mismatches_per_line(run_dir / fail["files"]["frames"][str(per["frame"])]["diff"])
        assert lines is not None and len(lines) == H
        assert sum(lines) == per["mismatches"]
    lines = mismatches_per_line(run_dir / fail["files"]["frames"]["1"]["diff"])
    assert lines[5] >= 4 and all(lines[y] >= 4 for y in range(10, 14))  # the short line and the bad block
    assert mismatches_per_line(run_dir / "no-such.png") is None


def test_pictures_past_the_budget_are_linked(run_dir, monkeypatch):
    monkeypatch.setattr(page, "EMBED_BUDGET_BYTES", 1)  # the first picture spends it
    c = _parse(write_index(run_dir))
    linked = [i["src"] for i in c.images if not i["src"].startswith("data:")]
    assert linked and all((run_dir / src).is_file() for src in linked)


def test_missing_report_is_one_clear_error(tmp_path):
    with pytest.raises(ConfigError, match="report.json is missing or unreadable"):
        write_index(tmp_path)
    with pytest.raises(ConfigError, match="not a model report"):
        write_model_page(tmp_path)


def test_model_page_draws_the_report_histogram(tmp_path):
    spec = preset("edge")
    images = [np.stack([box(H, W)] * 3, axis=2), np.stack([checkerboard(H, W)] * 3, axis=2)]
    write_model_report(spec, images, tmp_path)
    c = _parse(write_model_page(tmp_path))
    data = json.loads((tmp_path / "report.json").read_text())
    hist = data["quality"]["overall"]["error_histogram"]
    html = (tmp_path / "index.html").read_text()
    for k, n in hist:  # every bin of the overall histogram is a bar with its count in its tooltip
        label = f"{k:+d}" if k else "0"
        assert f"fixed point minus float, LSB {label}: {n:,}</title>" in html
    pics = [_decode(i["src"]) for i in c.images]
    assert len(pics) == 4 and all(p.size == (W, H) for p in pics)  # output and error of each image


def test_lines_chart_prefers_the_verdicts_own_counts(run_dir, tmp_path):
    import shutil

    copy = tmp_path / "run"
    shutil.copytree(run_dir, copy)
    report = json.loads((copy / "report.json").read_text())
    fail = next(x for x in report["cases"] if x["id"] == FAIL_ID)
    first = str(min(int(k) for k in fail["files"]["frames"]))
    for per in fail["verdict"]["per_frame"]:
        per["mismatches_per_line"] = [7] * H  # what a writer that lists the counts would store
    (copy / "report.json").write_text(json.dumps(report))
    html = write_index(copy).read_text()
    assert f"failing pixels per line, frame {first}" in html
    assert "line 23: 7</title>" in html and "line 5: 7</title>" in html
