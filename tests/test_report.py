"""Reports: PNGs open with Pillow, JUnit parses with xml.etree, report.json loads, names stay inside out_dir."""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

from conftest import pack_capture
from PIL import Image

from vkit.video.capture import UNKNOWN, CaptureBuilder, RunFacts
from vkit.core.errors import ConfigError
from vkit.model.pipeline import preset, run_model
from vkit.report.writers import (
    MISSING_COLOUR,
    XZ_COLOUR,
    case_entry,
    format_summary,
    merge_reports,
    safe_name,
    write_case_report,
    write_run_report,
)
from vkit.check.scoreboard import score

H, W = 24, 32


@pytest.fixture(scope="module")
def failing():
    spec = preset("blur")
    img = np.random.default_rng(1).integers(0, 256, (H, W)).astype(np.uint8)
    r = run_model(spec, img)
    out = r.output.copy()
    out[10:14, 20:24] = (out[10:14, 20:24] + 60) % 256  # a defect in one 4x4 block
    out[2, 2] = UNKNOWN
    cap = pack_capture([r.output, out], rows={5: list(out[5, :28])})
    v = score([r, r], cap)
    return r, cap, v


def test_case_report_writes_valid_pngs_that_localise_the_defect(failing, tmp_path) -> None:
    r, cap, v = failing
    paths = write_case_report("blur/seed 1", v, [r, r], cap, tmp_path, {"seed": 1})
    assert set(paths["frames"]) == {"0", "1"}  # frame 0 misses 4 pixels of line 5, frame 1 too
    f1 = paths["frames"]["1"]
    for key in ("expected", "actual", "diff", "composite"):
        p = tmp_path / f1[key]
        assert not Path(f1[key]).is_absolute()
        with Image.open(p) as im:  # Pillow must read back what we wrote
            im.verify()
    diff = np.asarray(Image.open(tmp_path / f1["diff"]).convert("RGB"))
    assert diff.shape == (H, W, 3)
    hot = diff.sum(axis=2) > 0
    assert hot[10:14, 20:24].all()  # the block is lit
    assert tuple(diff[2, 2]) == XZ_COLOUR and tuple(diff[5, 30]) == MISSING_COLOUR
    assert not hot[15:, :].any()  # everything else is black (equal)
    comp = Image.open(tmp_path / f1["composite"])
    assert comp.width >= 3 * 256  # three panels, each enlarged to at least 256 px wide
    body = json.loads((tmp_path / paths["verdict"]).read_text())
    assert body["id"] == "blur/seed 1" and body["meta"] == {"seed": 1}
    assert body["verdict"]["mismatches"] == v.mismatches


def test_passing_case_writes_no_pictures(tmp_path) -> None:
    spec = preset("median")
    r = run_model(spec, np.full((4, 5), 9, np.uint8))
    v = score([r], pack_capture([r.output]))
    paths = write_case_report("ok", v, [r], pack_capture([r.output]), tmp_path)
    assert paths["frames"] == {} and (tmp_path / paths["verdict"]).exists()


def test_passing_case_pictures_on_request(tmp_path) -> None:
    # pictures="all" (the demo's setting) shows every checked frame; a pass has an all-black diff
    spec = preset("median")
    r = run_model(spec, np.full((4, 5), 9, np.uint8))
    v = score([r], pack_capture([r.output]))
    paths = write_case_report("ok", v, [r], pack_capture([r.output]), tmp_path, pictures="all")
    files = paths["frames"]["0"]
    assert set(files) == {"input", "expected", "actual", "diff", "composite"}
    diff = np.asarray(Image.open(tmp_path / files["diff"]).convert("RGB"))
    assert diff.max() == 0


@pytest.mark.parametrize("case_id", ["../../etc/passwd", "/abs/path", "..", "a\\b:c*?", "", "x" * 300])
def test_case_ids_never_escape_out_dir(case_id, failing, tmp_path) -> None:
    r, cap, v = failing
    name = safe_name(case_id)
    assert "/" not in name and "\\" not in name and not name.startswith(".") and len(name) <= 89
    out = tmp_path / "out"
    paths = write_case_report(case_id, v, [r, r], cap, out)
    for p in [paths["verdict"]] + [f for fr in paths["frames"].values() for f in fr.values()]:
        full = (out / p).resolve()
        assert out.resolve() in full.parents


def test_safe_names_do_not_collide() -> None:
    assert safe_name("a/b") != safe_name("a_b") and safe_name("a b") != safe_name("a:b")
    assert safe_name("edge_1") == "edge_1"


def test_run_report_json_junit_and_summary(failing, tmp_path) -> None:
    r, cap, v = failing
    files = write_case_report("blur-bad", v, [r, r], cap, tmp_path)
    ok = score([r], pack_capture([r.output]))
    no_out = score([r], CaptureBuilder(RunFacts(timed_out=True, timeout_clocks=10)).build())
    cases = [
        case_entry("blur-bad", v, simulator="icarus", seeds={"image": 1}, files=files, coverage={"lines": 0.9}),
        case_entry("blur-ok", ok, simulator="verilator"),
        case_entry("blur-dead", no_out.to_dict(), simulator="ghdl"),
    ]
    out = write_run_report(cases, tmp_path)
    rep = json.loads(Path(out["json"]).read_text())
    assert rep["totals"] == {"cases": 3, "passed": 1, "failed": 2, "errors": 0}
    bad = rep["cases"][0]
    assert bad["id"] == "blur-bad" and bad["counts"]["mismatches"] == v.mismatches
    assert bad["diagnosis"]["kind"] == v.findings[0].kind
    assert bad["seeds"] == {"image": 1} and bad["coverage"] == {"lines": 0.9}
    assert bad["latency_clocks"] == 17
    assert (tmp_path / bad["files"]["frames"]["1"]["composite"]).exists()
    # JUnit XML shape (testsuites/testsuite/testcase/failure) as read by CI servers: common practice, no source.
    root = ET.parse(out["junit"]).getroot()
    tcs = root.findall("./testsuite/testcase")
    assert [t.get("name") for t in tcs] == ["blur-bad", "blur-ok", "blur-dead"]
    assert tcs[0].find("failure").get("message") == v.findings[0].message
    assert tcs[1].find("failure") is None
    assert "no output" in tcs[2].find("failure").get("message")
    assert root.find("testsuite").get("failures") == "2"
    summary = Path(out["summary"]).read_text()
    lines = summary.splitlines()
    assert lines[0].split() == ["case", "simulator", "path", "verdict", "mismatches", "diagnosis"]
    col = lines[0].index("verdict")
    assert [ln[col : col + 9].strip() for ln in lines[2:5]] == ["fail", "pass", "no_output"]
    assert lines[-1] == "drive paths: - 3"  # entries made without a drive path say so
    assert summary == format_summary(cases)


def test_duplicate_case_ids_are_refused(failing, tmp_path) -> None:
    _, _, v = failing
    with pytest.raises(ConfigError, match="more than once"):
        write_run_report([case_entry("a", v), case_entry("a", v)], tmp_path)


def test_merge_reports_rebases_paths(failing, tmp_path) -> None:
    r, cap, v = failing
    shard_a, shard_b = tmp_path / "a", tmp_path / "b"
    fa = write_case_report("one", v, [r, r], cap, shard_a)
    write_run_report([case_entry("one", v, files=fa)], shard_a)
    write_run_report([case_entry("two", score([r], pack_capture([r.output])))], shard_b)
    merged = merge_reports([shard_a / "report.json", shard_b], tmp_path / "all")
    assert [c["id"] for c in merged["cases"]] == ["one", "two"]
    assert merged["totals"]["passed"] == 1
    again = json.loads((tmp_path / "all" / "report.json").read_text())
    comp = again["cases"][0]["files"]["frames"]["1"]["composite"]
    assert (tmp_path / "all" / comp).resolve() == (shard_a / fa["frames"]["1"]["composite"]).resolve()
    ET.parse(tmp_path / "all" / "junit.xml")
    with pytest.raises(ConfigError, match="shards must not overlap"):
        merge_reports([shard_a, shard_a])
    with pytest.raises(ConfigError, match="cannot read"):
        merge_reports([tmp_path / "nowhere"])
