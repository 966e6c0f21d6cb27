"""Build cache and runner: keys, reuse, locking, and real regressions on the sample designs."""

from __future__ import annotations

import json
import threading
import time
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from PIL import Image

from conftest import SAMPLE_RTL, simulator_available
from vkit.sim.buildcache import STAMP_NAME, BuildCache, BuildRequest, build_key
from vkit.cli import main
from vkit.run.config import expand_matrix, load_config

MANIFEST = SAMPLE_RTL / "designs.toml"


def _request(src: Path, **over) -> BuildRequest:
    args = dict(parameters={"W": 8}, defines={}, build_args=["-Wall"])
    args.update(over)
    version = args.pop("version", "Icarus 11")
    return BuildRequest.make("icarus", version, "top", [src], "verilog", **args)


def test_key_follows_everything_that_changes_a_build(tmp_path):
    src = tmp_path / "top.v"
    src.write_text("module top; endmodule\n")
    base = build_key(_request(src))
    assert build_key(_request(src)) == base
    assert build_key(_request(src, parameters={"W": 9})) != base
    assert build_key(_request(src, defines={"BUG_X": 1})) != base
    assert build_key(_request(src, version="Icarus 12")) != base
    assert build_key(_request(src, build_args=[])) != base
    src.write_text("module top; wire a; endmodule\n")
    assert build_key(_request(src)) != base  # contents, not names or times


def test_parallel_requests_build_once(tmp_path):
    src = tmp_path / "top.v"
    src.write_text("module top; endmodule\n")
    cache = BuildCache(tmp_path / "cache")
    calls = []

    def builder(bdir: Path) -> None:
        calls.append(bdir)
        time.sleep(0.3)
        (bdir / "model").write_text("built\n")

    outcomes = []
    threads = [threading.Thread(target=lambda: outcomes.append(cache.ensure(_request(src), builder))) for _ in range(3)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert len(calls) == 1
    assert sorted(o.reused for o in outcomes) == [False, True, True]
    assert (outcomes[0].build_dir / STAMP_NAME).is_file()


def test_failed_build_leaves_no_stamp(tmp_path):
    src = tmp_path / "top.v"
    src.write_text("module top; endmodule\n")
    cache = BuildCache(tmp_path / "cache")

    def broken(bdir: Path) -> None:
        raise RuntimeError("compiler said no")

    with pytest.raises(RuntimeError):
        cache.ensure(_request(src), broken)
    assert not cache.is_built(_request(src))


def _config(tmp_path: Path, body: str, cache: Path) -> Path:
    p = tmp_path / "vkit.toml"
    p.write_text(f'[run]\nsimulators = ["icarus"]\ncache_dir = "{cache}"\nout_dir = "out"\n' + body)
    return p


@pytest.mark.sim
def test_second_build_is_skipped(tmp_path):
    simulator_available("icarus")
    from vkit.run.runner import build_design

    cfg = load_config(_config(tmp_path, f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["edge_core"]\n'
                              '[stimulus]\npatterns = ["impulse"]\n', tmp_path / "cache"))
    case = expand_matrix(cfg)[0]
    cache = BuildCache(tmp_path / "cache")
    t0 = time.monotonic()
    first = build_design(case, cache)
    cold = time.monotonic() - t0
    t0 = time.monotonic()
    second = build_design(case, cache)
    warm = time.monotonic() - t0
    assert not first.reused and second.reused and second.build_dir == first.build_dir
    assert (first.build_dir / "sim.vvp").is_file()
    assert warm < cold, f"cached lookup {warm:.3f} s vs build {cold:.3f} s"


@pytest.mark.sim
def test_run_tiny_regression_passes(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    body = (f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["edge_core", "stream_core"]\n'
            '[stimulus]\npatterns = ["conveyor"]\ntimings = ["tiny32x24"]\nstalls = [0.1]\nbackpressure = [0.2]\n')
    code = main(["run", str(_config(tmp_path, body, build_cache_dir)), "-j", "2"])
    out = capsys.readouterr().out
    assert code == 0, out
    assert "[2/2]" in out
    report = json.loads((tmp_path / "out" / "report.json").read_text())
    assert report["totals"] == {"cases": 2, "passed": 2, "failed": 0, "errors": 0}
    suite = ET.parse(tmp_path / "out" / "junit.xml").getroot()  # JUnit XML read back with xml.etree
    assert suite.get("tests") == "2" and suite.get("failures") == "0"
    for case in report["cases"]:
        assert case["coverage"]["stages"], "range coverage is part of every case"
        assert isinstance(case["coverage"]["warnings"], list)


@pytest.mark.sim
def test_bug_variant_fails_with_picture_and_diagnosis(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    body = (f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["blur_core"]\nbugs = "only"\n'
            '[stimulus]\npatterns = ["conveyor"]\ntimings = ["tiny32x24"]\n')
    cfg = _config(tmp_path, body, build_cache_dir)
    code = main(["run", str(cfg), "--only", "blur_truncate"])
    out = capsys.readouterr().out
    assert code == 1, out
    report = json.loads((tmp_path / "out" / "report.json").read_text())
    (case,) = report["cases"]
    assert case["status"] == "fail"
    # the manifest says this bug (truncating instead of rounding) should read as a rounding error
    assert case["diagnosis"]["kind"] == "rounding"
    diff = tmp_path / "out" / case["files"]["frames"]["0"]["diff"]
    with Image.open(diff) as im:
        assert im.size == (32, 24)


@pytest.mark.sim
def test_compile_error_is_one_tool_line_and_reported(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    (tmp_path / "bad.v").write_text("module bad(input clk);\n  wire x = ;\nendmodule\n")
    body = ('[designs.bad]\ntop = "bad"\nsources = ["bad.v"]\nspec = "blur"\n'
            'ports = { clock = "clk", reset = "rst", in_vsync = "a", in_hsync = "b", in_de = "c", in_data = "d",'
            ' out_de = "e", out_data = "f" }\n[stimulus]\npatterns = ["impulse"]\n')
    code = main(["run", str(_config(tmp_path, body, build_cache_dir))])
    captured = capsys.readouterr()
    assert code == 2
    assert "Traceback" not in captured.out + captured.err
    report = json.loads((tmp_path / "out" / "report.json").read_text())
    msg = report["cases"][0]["diagnosis"]["message"]
    assert "could not build bad" in msg and "bad.v:2" in msg


@pytest.mark.sim
def test_shards_merge_into_one_report(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    body = (f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["median_core"]\n'
            '[stimulus]\npatterns = ["impulse", "checkerboard", "columns"]\ntimings = ["tiny32x24"]\n')
    cfg = str(_config(tmp_path, body, build_cache_dir))
    assert main(["run", cfg, "--shard", "1/2", "--out", str(tmp_path / "s1")]) == 0
    assert main(["run", cfg, "--shard", "2/2", "--out", str(tmp_path / "s2")]) == 0
    assert main(["merge", str(tmp_path / "all"), str(tmp_path / "s1"), str(tmp_path / "s2" / "report.json")]) == 0
    capsys.readouterr()
    merged = json.loads((tmp_path / "all" / "report.json").read_text())
    ids = sorted(c["id"] for c in merged["cases"])
    assert ids == sorted(c.id for c in expand_matrix(load_config(cfg)))
    assert (tmp_path / "all" / "junit.xml").is_file()


@pytest.mark.sim
def test_fast_and_native_paths_give_the_clock_path_verdicts(tmp_path, build_cache_dir, capsys):
    # The generated HDL harness, under cocotb ("fast") or as a plain executable ("native"), must judge
    # every case as the per-clock cocotb path does.
    simulator_available("icarus")
    body = (f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["edge_core", "stream_core"]\n'
            f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["blur_core"]\nbugs = "only"\n'
            '[stimulus]\npatterns = ["conveyor"]\ntimings = ["tiny32x24"]\nstalls = [0.1]\nbackpressure = [0.2]\n')
    cfg = _config(tmp_path, body, build_cache_dir)
    verdicts = {}
    for path in ("clock", "fast", "native"):
        code = main(["run", str(cfg), "-j", "2", "--path", path, "--no-waves", "--out", str(tmp_path / path),
                     "--only", "edge_core/*", "--only", "stream_core/*", "--only", "*blur_truncate*"])
        out = capsys.readouterr().out
        assert code == 1, out  # the seeded bug fails on both paths
        report = json.loads((tmp_path / path / "report.json").read_text())
        verdicts[path] = {c["id"]: (c["status"], (c["diagnosis"] or {}).get("kind")) for c in report["cases"]}
        for c in report["cases"]:
            meta = json.loads((tmp_path / path / c["files"]["verdict"]).read_text())["meta"]
            assert meta["path"] == path
    assert verdicts["fast"] == verdicts["clock"] == verdicts["native"]
    assert {s for s, _ in verdicts["fast"].values()} == {"pass", "fail"}


@pytest.mark.sim
def test_failing_verilator_case_gets_a_wave_window(tmp_path, build_cache_dir, capsys):
    # A failing case on the default simulator is rerun on Icarus with a dump cut to a window around
    # its first mismatch; the report names the file.
    simulator_available("verilator")
    simulator_available("icarus")
    body = (f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["blur_core"]\nbugs = "only"\n'
            '[stimulus]\npatterns = ["conveyor"]\ntimings = ["tiny32x24"]\n')
    cfg = _config(tmp_path, body, build_cache_dir)
    assert main(["run", str(cfg), "--sim", "verilator", "--only", "*blur_truncate*"]) == 1
    out = capsys.readouterr().out
    assert "waves:" in out
    (case,) = json.loads((tmp_path / "out" / "report.json").read_text())["cases"]
    wave = tmp_path / "out" / case["files"]["waves"]
    assert wave.is_file() and wave.stat().st_size > 100
    meta = json.loads((tmp_path / "out" / case["files"]["verdict"]).read_text())["meta"]
    assert meta["waves"]["simulator"] == "icarus" and meta["waves"]["first_clock"] < meta["waves"]["last_clock"]


@pytest.mark.sim
def test_ghdl_case_gets_a_wave_window_cut_from_its_vcd(tmp_path, build_cache_dir, capsys):
    # GHDL cannot switch its dump on and off at run time; the runner dumps the run and keeps the window.
    simulator_available("ghdl")
    body = (f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["edge_core_vhdl"]\n'
            '[stimulus]\npatterns = ["box"]\ntimings = ["tiny32x24"]\n')
    cfg = _config(tmp_path, body, build_cache_dir)
    assert main(["run", str(cfg), "--sim", "ghdl", "--waves"]) == 0, capsys.readouterr().out
    (case,) = json.loads((tmp_path / "out" / "report.json").read_text())["cases"]
    meta = json.loads((tmp_path / "out" / case["files"]["verdict"]).read_text())["meta"]["waves"]
    text = (tmp_path / "out" / case["files"]["waves"]).read_text()
    times = [int(line[1:]) for line in text.splitlines() if line.startswith("#")]
    assert meta["format"] == "vcd" and "$enddefinitions" in text
    assert min(times) >= meta["from_ps"] and max(times) <= meta["to_ps"]  # the dump's ticks are 1 ps here
    assert not list((tmp_path / "out").rglob("whole_run.vcd"))  # the full dump is not kept
