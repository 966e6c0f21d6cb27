"""The run page in a real browser: a small failing Icarus run, its index.html loaded by headless Chromium.

Chromium runs the page's own script (table filter from the URL fragment, picture decode marks) under a
virtual-time budget, then dumps the DOM; the checks read that DOM. The screenshot is kept under the
test's tmp dir and copied to ``$VKIT_TEST_ARTIFACTS`` (default: ``<tmp>/vkit-test-artifacts``).
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import tempfile
from html.parser import HTMLParser
from pathlib import Path

import pytest
from PIL import Image

from conftest import SAMPLE_RTL, simulator_available
from vkit.cli import main
from vkit.report.page import write_index
from vkit.report.writers import safe_name

MANIFEST = SAMPLE_RTL / "designs.toml"
SHOT_SIZE = (1280, 2000)
"""Screenshot window, pixels: the header, the table and the first failure card."""
_BROWSER_TIMEOUT_S = 120


def _chromium() -> str:
    for name in ("chromium", "chromium-browser", "google-chrome"):
        found = shutil.which(name)
        if found:
            return found
    pytest.skip("no Chromium here: install it with `apt-get install chromium` (Debian) to run the browser test")


def _browse(url: str, profile: Path, *extra: str) -> subprocess.CompletedProcess[str]:
    args = [_chromium(), "--headless", "--disable-gpu", f"--user-data-dir={profile}", "--hide-scrollbars",
            "--virtual-time-budget=5000", *extra, url]
    if hasattr(os, "geteuid") and os.geteuid() == 0:
        args.insert(1, "--no-sandbox")  # Chromium refuses to start its sandbox as root
    done = subprocess.run(args, capture_output=True, text=True, timeout=_BROWSER_TIMEOUT_S)
    assert done.returncode == 0, done.stderr[-2000:]
    return done


class _Dom(HTMLParser):
    """The rows, pictures and counters of a dumped page."""

    def __init__(self, text: str):
        super().__init__(convert_charrefs=True)
        self.rows: list[dict[str, str | None]] = []
        self.images: list[dict[str, str | None]] = []
        self.body: dict[str, str | None] = {}
        self.shown = ""
        self._in_shown = False
        self.feed(text)

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "tr" and a.get("class") == "case":
            self.rows.append(a)
        elif tag == "img":
            self.images.append(a)
        elif tag == "body":
            self.body = a
        self._in_shown = a.get("id") == "shown-count"

    def handle_data(self, data):
        if self._in_shown:
            self.shown += data
            self._in_shown = False


@pytest.fixture(scope="module")
def failing_run(tmp_path_factory, build_cache_dir):
    """blur_core and its seeded bugs on Icarus, 32x24 conveyor frames: a pass and two failures."""
    simulator_available("icarus")
    root = tmp_path_factory.mktemp("page-run")
    cfg = root / "vkit.toml"
    cfg.write_text(f'[run]\nsimulators = ["icarus"]\ncache_dir = "{build_cache_dir}"\nout_dir = "out"\n'
                   f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["blur_core"]\nbugs = true\n'
                   '[stimulus]\npatterns = ["conveyor"]\ntimings = ["tiny32x24"]\n')
    assert main(["run", str(cfg), "-j", "2"]) == 1  # the seeded bugs fail
    out = root / "out"
    write_index(out)
    return out, json.loads((out / "report.json").read_text())


@pytest.mark.sim
def test_browser_shows_a_row_per_case_and_the_failing_picture(failing_run, tmp_path):
    out, report = failing_run
    dom = _Dom(_browse((out / "index.html").as_uri(), tmp_path / "profile", "--dump-dom").stdout)
    assert len(dom.rows) == len(report["cases"]) == 3
    assert sorted(r["data-target"] for r in dom.rows) == sorted(f"case-{safe_name(c['id'])}" for c in report["cases"])
    failing = [c for c in report["cases"] if c["status"] != "pass"]
    assert failing, "the seeded bugs must fail"
    for case in failing:
        frames = case["files"]["frames"]
        with Image.open(out / frames[min(frames, key=int)]["composite"]) as im:
            size = im.size
        (img,) = [i for i in dom.images if (i.get("alt") or "").endswith(case["id"])]
        assert img["data-decoded"] == f"{size[0]}x{size[1]}"  # Chromium decoded it at the composite's size


@pytest.mark.sim
@pytest.mark.parametrize("wanted", ["pass", "fail", "failing"])
def test_browser_filters_by_status_from_the_url(failing_run, tmp_path, wanted):
    out, report = failing_run
    url = (out / "index.html").as_uri() + f"#status={wanted}"
    dom = _Dom(_browse(url, tmp_path / "profile", "--dump-dom").stdout)
    keep = [c["status"] != "pass" if wanted == "failing" else c["status"] == wanted for c in report["cases"]]
    visible = [r for r in dom.rows if "hidden" not in r]
    assert len(visible) == sum(keep) and dom.shown == str(sum(keep))
    assert all(r["data-status"] == wanted or (wanted == "failing" and r["data-status"] != "pass") for r in visible)
    assert dom.body.get("data-filter") == f"status={wanted}&q="


@pytest.mark.sim
@pytest.mark.parametrize("order", ["-mismatches", "mismatches"])
def test_browser_sorts_by_a_column_from_the_url(failing_run, tmp_path, order):
    out, report = failing_run
    dom = _Dom(_browse((out / "index.html").as_uri() + f"#sort={order}", tmp_path / "profile", "--dump-dom").stdout)
    by_anchor = {f"case-{safe_name(c['id'])}": c["counts"]["mismatches"] for c in report["cases"]}
    shown = [by_anchor[r["data-target"]] for r in dom.rows]
    assert shown == sorted(by_anchor.values(), reverse=order.startswith("-")) and len(set(shown)) > 1


@pytest.mark.sim
def test_browser_screenshot_is_kept(failing_run, tmp_path):
    out, _ = failing_run
    shot = tmp_path / "index.png"
    _browse((out / "index.html").as_uri(), tmp_path / "profile", f"--screenshot={shot}",
            f"--window-size={SHOT_SIZE[0]},{SHOT_SIZE[1]}")
    with Image.open(shot) as im:
        assert im.size == SHOT_SIZE
        colours = im.convert("RGB").getcolors(maxcolors=1 << 20) or []
    assert len(colours) > 50, "the screenshot is (nearly) blank"
    keep = Path(os.environ.get("VKIT_TEST_ARTIFACTS", Path(tempfile.gettempdir()) / "vkit-test-artifacts"))
    keep.mkdir(parents=True, exist_ok=True)
    shutil.copy(shot, keep / "index-page.png")
    print(f"page screenshot: {keep / 'index-page.png'}")


def _rebase(files, src: Path, dst: Path):
    if isinstance(files, dict):
        return {k: _rebase(v, src, dst) for k, v in files.items()}
    if isinstance(files, str):
        return Path(os.path.relpath(src / files, dst)).as_posix()
    return files


@pytest.mark.sim
def test_page_of_400_failing_cases_stays_under_20_mb(failing_run, tmp_path):
    """Issue 13 budget: a 400-case page under 20 MB. Every case here fails (the heaviest page: each
    embeds its composite), built from the real run's failing entries with their real pictures."""
    from vkit.report.writers import write_run_report

    out, report = failing_run
    failing = [c for c in report["cases"] if c["status"] != "pass"]
    big = tmp_path / "run400"
    cases = []
    for i in range(400):
        c = json.loads(json.dumps(failing[i % len(failing)]))
        c["id"] = f"{c['id']}/copy{i:03d}"
        c["files"] = _rebase(c["files"], out, big)
        cases.append(c)
    write_run_report(cases, big)
    page = write_index(big)
    size = page.stat().st_size
    text = page.read_text()
    embedded = text.count('src="data:image/png;base64,')
    print(f"400-case page: {size / 1e6:.2f} MB, {embedded} pictures embedded, the rest linked")
    assert size < 20_000_000
    assert text.count('<tr class="case"') == 400
