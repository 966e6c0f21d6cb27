"""The sample designs in sample_rtl/foreign/ on real simulators: a clock-enabled design with its own output
enable, active-low ports whose sync registers reset to 0, a design sized by the line length.

Every good variant passes and every seeded bug fails, with the same verdict on the per-clock, fast and
native drive paths; pin polarity is independent of the timing's sync polarity; reset fill is left out
of the sync counts unless ``strict_controls`` is set.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from conftest import SAMPLE_RTL, simulator_available
from vkit.run.config import config_from_dict
from vkit.run.runner import run

pytestmark = pytest.mark.sim

MANIFEST = SAMPLE_RTL / "foreign" / "designs.toml"

# Small timings with negative syncs: a 32x24 frame with the blanking of tiny32x24 (2/3/3 clocks,
# 1/1/1 lines), the syncs' polarity as in VESA DMT 640x480 @ 60 Hz (both negative; from memory).
NEGATIVE = {"h_active": 32, "h_front_porch": 2, "h_sync": 3, "h_back_porch": 3, "v_active": 24,
            "v_front_porch": 1, "v_sync": 1, "v_back_porch": 1, "hsync_active_high": False,
            "vsync_active_high": False, "name": "neg32x24"}


def _config(tmp: Path, cache: Path, *, designs: dict | None = None, imports: list | None = None,
            timings: list | None = None) -> object:
    data = {
        "run": {"simulators": ["icarus", "ghdl"], "jobs": 2, "cache_dir": str(cache), "waves": "off"},
        "stimulus": {"patterns": ["box", {"name": "box", "label": "box64", "timings": ["tiny64x48"],
                                          "designs": ["rowmax_htotal*"]}],
                     "timings": timings or ["tiny32x24"], "seeds": [1]},
    }
    if imports is not None:
        data["import"] = imports
    if designs is not None:
        data["designs"] = designs
    return config_from_dict(data, tmp / "vkit.toml")


@pytest.fixture(scope="module")
def by_path(tmp_path_factory: pytest.TempPathFactory, build_cache_dir: Path) -> dict[str, dict]:
    """Every variant of the three designs on each drive path: path -> case id -> CaseResult."""
    simulator_available("icarus")
    simulator_available("ghdl")
    tmp = tmp_path_factory.mktemp("foreign")
    cfg = _config(tmp, build_cache_dir, imports=[{"manifest": str(MANIFEST), "bugs": True}])
    out = {}
    for drive in ("clock", "fast", "native"):
        sims = ["icarus"] if drive == "native" else ["icarus", "ghdl"]  # the native build is Verilog only
        result = run(cfg, jobs=2, progress=False, out_dir=tmp / drive, drive=drive, simulators=sims)
        out[drive] = {c.id: c for c in result.cases}
    return out


def test_good_variants_pass_and_every_bug_fails(by_path: dict[str, dict]) -> None:
    cases = by_path["clock"]
    assert {c.status for cid, c in cases.items() if "@" not in cid} == {"pass"}, {
        cid: c.diagnosis for cid, c in cases.items() if "@" not in cid and c.status != "pass"}
    bugs = {cid.split("/")[0] for cid in cases if "@" in cid}
    assert bugs == {"smooth_ce@enable_ignored_in_blanking", "smooth_ce@latency_in_clocks",
                    "nsync_sharpen@den_polarity_slip", "rowmax_htotal@fixed_second_line"}
    for bug in bugs:
        assert any(c.status == "fail" for cid, c in cases.items() if cid.startswith(bug + "/")), bug


def test_latency_counted_in_clocks_only_shows_under_an_uneven_enable(by_path: dict[str, dict]) -> None:
    cases = by_path["clock"]
    lat = {cid.rsplit("-", 1)[-1]: c.status for cid, c in cases.items()
           if cid.startswith("smooth_ce@latency_in_clocks/") and "/box-" in cid}
    assert lat == {"en2": "pass", "en0.5g3": "fail"}  # four clocks are two samples only at one enable in two
    blank = [c.status for cid, c in cases.items() if cid.startswith("smooth_ce@enable_ignored_in_blanking/")]
    assert blank and set(blank) == {"fail"}


def test_same_verdicts_on_every_drive_path(by_path: dict[str, dict]) -> None:
    clock = by_path["clock"]
    for drive in ("fast", "native"):
        other = by_path[drive]
        assert other, drive
        for cid, c in other.items():
            assert cid in clock
            assert c.status == clock[cid].status, (drive, cid, c.diagnosis, clock[cid].diagnosis)
            if "@" in cid:
                continue  # a broken design's output right after reset may differ by the first clock's race
            a, b = c.entry.get("verdict", {}), clock[cid].entry.get("verdict", {})
            for key in ("latency_clocks", "latency_samples", "mismatches"):
                assert a.get(key) == b.get(key), (drive, cid, key)


def test_clock_enabled_design_reports_latency_in_samples(by_path: dict[str, dict]) -> None:
    for cid, c in by_path["clock"].items():
        if cid.startswith("smooth_ce/") and "/tiny32x24/" in cid:
            verdict = c.entry["verdict"]
            # h_total (40 samples) + 3, as the design's header states; in clocks about twice that
            assert verdict["latency_samples"] == 43, cid
            assert verdict["latency_clocks"] >= 2 * 43 - 4, cid


def test_reset_fill_of_active_low_syncs_is_a_warning(by_path: dict[str, dict]) -> None:
    good = [c for cid, c in by_path["clock"].items() if cid.startswith("nsync_sharpen/")]
    assert good and all(c.status == "pass" for c in good)
    assert all(any("left out as reset fill" in w and "clocks 0..0" in w for w in c.warnings) for c in good)


def _rowmax(polarity: dict | None, strict: bool = False) -> dict:
    body = {"top": "rowmax_htotal", "sources": [str(SAMPLE_RTL / "foreign" / "rowmax_htotal.v")], "spec": "dilate",
            "reset_active_high": False, "timing_parameters": {"H_TOTAL": "h_total"}, "strict_controls": strict,
            "ports": {"clock": "clk", "reset": "rst_n", "in_vsync": "vs_in", "in_hsync": "hs_in", "in_de": "de_in",
                      "in_data": "px_in", "out_vsync": "vs_out", "out_hsync": "hs_out", "out_de": "de_out",
                      "out_data": "px_out"}}
    if polarity is not None:
        body["port_polarity"] = polarity
    return body


def test_negative_sync_timing_into_active_high_ports_and_the_reverse(tmp_path: Path, build_cache_dir: Path) -> None:
    simulator_available("icarus")
    designs = {
        "high_pins": _rowmax({"syncs": "high"}),          # active-high pins, negative-sync timing
        "as_timing": _rowmax(None),                       # pins follow the timing: low pulses, reset fill
        "as_timing_strict": _rowmax(None, strict=True),   # ... counted: the extra pulse of the issue
    }
    cfg = _config(tmp_path, build_cache_dir, designs=designs, timings=[NEGATIVE])
    result = run(cfg, jobs=2, progress=False, out_dir=tmp_path / "out", simulators=["icarus"], drive="native",
                 only=["*/box-*"])
    status = {c.id.split("/")[0]: c for c in result.cases}
    assert status["high_pins"].status == "pass" and not status["high_pins"].warnings[:0]
    assert not any("reset fill" in w for w in status["high_pins"].warnings)
    assert status["as_timing"].status == "pass"
    assert any("reset fill" in w for w in status["as_timing"].warnings)
    strict = status["as_timing_strict"]
    assert strict.status == "fail" and "output vsync pulses: 2, input vsync pulses: 1" in strict.diagnosis
