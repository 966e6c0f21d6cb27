"""The regression config: checked keys and types, manifest import, the case matrix and shards."""

from __future__ import annotations

from pathlib import Path

import pytest

from vkit.run.config import expand_matrix, load_config, parse_shard, select_cases, shard_cases
from vkit.core.errors import ConfigError
from vkit.video.timing import preset

MANIFEST = Path(__file__).resolve().parents[1] / "sample_rtl" / "designs.toml"

BASE = f"""
[run]
simulators = ["icarus"]

[[import]]
manifest = "{MANIFEST}"
use = ["edge_core", "stream_core"]

[stimulus]
patterns = ["impulse", {{ name = "conveyor", seeds = [1, 2] }}]
timings = ["tiny32x24", "tiny64x48"]
stalls = [0, 0.1]
backpressure = [0, {{ probability = 0.2, max_length = 2 }}]
"""


def _write(tmp_path: Path, text: str, name: str = "vkit.toml") -> Path:
    p = tmp_path / name
    p.write_text(text)
    return p


def test_unknown_key_suggests_the_closest(tmp_path):
    p = _write(tmp_path, BASE.replace('simulators = ["icarus"]', 'simulator = ["icarus"]'))
    with pytest.raises(ConfigError, match="unknown key 'simulator'; did you mean 'simulators'"):
        load_config(p)


def test_malformed_toml_names_file_line_and_column(tmp_path):
    p = _write(tmp_path, "[run]\njobs = 2\nout_dir = \n")
    with pytest.raises(ConfigError) as err:
        load_config(p)
    assert str(err.value).startswith(f"{p}:3:")
    assert "\n" not in str(err.value)


def test_missing_source_is_named(tmp_path):
    text = """
[designs.mine]
top = "mine"
sources = ["rtl/mine.v"]
spec = "blur"
ports = { clock = "clk" }
[stimulus]
patterns = ["impulse"]
"""
    with pytest.raises(ConfigError, match=r"sources = 'rtl/mine.v' is not found"):
        load_config(_write(tmp_path, text))


def test_wrong_type_names_the_fix(tmp_path):
    p = _write(tmp_path, BASE.replace("[run]", "[run]\njobs = \"two\""))
    with pytest.raises(ConfigError, match=r"jobs = 'two' is a string; give an integer >= 1"):
        load_config(p)


def test_language_from_extension_and_pyproject(tmp_path):
    (tmp_path / "mine.vhd").write_text("-- empty\n")
    text = """
[tool.vkit.designs.mine]
top = "mine"
sources = ["*.vhd"]
spec = "blur"
ports = { clock = "clk" }
[tool.vkit.stimulus]
patterns = ["impulse"]
"""
    cfg = load_config(_write(tmp_path, text, "pyproject.toml"))
    assert cfg.designs["mine"].language == "vhdl"
    # a VHDL design runs on GHDL only, whatever [run] asks for
    assert {c.simulator for c in expand_matrix(cfg, ["icarus", "ghdl"])} == {"ghdl"}


def test_matrix_is_complete_sorted_and_stable(tmp_path):
    cfg = load_config(_write(tmp_path, BASE))
    cases = expand_matrix(cfg)
    ids = [c.id for c in cases]
    assert ids == sorted(ids) and len(set(ids)) == len(ids)
    # edge (video): 3 stimuli x 2 timings x 2 stall settings; stream: 3 x 2 sizes x 1 gap x 2 back-pressure
    assert len(cases) == 3 * 2 * 2 + 3 * 2 * 1 * 2
    assert "edge_core/icarus/conveyor-s2/tiny64x48/stall0.1" in ids
    assert "stream_core/icarus/impulse-s1/32x24/nogap-bp0.2m2" in ids
    assert [c.id for c in expand_matrix(load_config(_write(tmp_path, BASE)))] == ids
    assert [c.index for c in cases] == list(range(len(cases)))


def test_shards_are_disjoint_and_cover_everything(tmp_path):
    cases = expand_matrix(load_config(_write(tmp_path, BASE)))
    for n in (1, 2, 3, 5):
        parts = [shard_cases(cases, f"{k}/{n}") for k in range(1, n + 1)]
        seen = [c.id for part in parts for c in part]
        assert sorted(seen) == sorted(c.id for c in cases)
        assert len(seen) == len(set(seen))
        assert [c.id for c in shard_cases(cases, (1, n))] == [c.id for c in parts[0]]
    with pytest.raises(ConfigError, match="K/N"):
        parse_shard("3/2")


def test_only_filters_by_glob_or_text(tmp_path):
    cases = expand_matrix(load_config(_write(tmp_path, BASE)))
    assert all("stream_core" in c.id for c in select_cases(cases, "stream_core/*"))
    assert all("conveyor-s2" in c.id for c in select_cases(cases, "conveyor-s2"))
    with pytest.raises(ConfigError, match="matches none"):
        select_cases(cases, "nothing-like-this")


def test_bug_variants_and_declared_latency(tmp_path):
    cfg = load_config(_write(tmp_path, BASE.replace('use = ["edge_core", "stream_core"]', 'use = ["edge_core"]\nbugs = true')))
    bug = cfg.designs["edge_core@right_border_zero"]
    assert bug.defines == {"BUG_RIGHT_BORDER_ZERO": 1} and bug.expect == "fail" and bug.expect_kind == "border"
    cases = {c.id: c for c in expand_matrix(cfg)}
    assert cases["edge_core/icarus/impulse-s1/tiny32x24/nostall"].declared_latency_clocks() == 49
    # other timings: h_total + 1 + pipeline_clocks, as sample_rtl/README.md documents
    assert cases["edge_core/icarus/impulse-s1/tiny64x48/nostall"].declared_latency_clocks() == preset("tiny64x48").h_total + 1 + 8
    assert cases["edge_core/icarus/impulse-s1/tiny32x24/stall0.1"].declared_latency_clocks() is None


def test_stimulus_axes_never_change_the_build(tmp_path):
    from vkit.run.runner import build_request
    from vkit.sim.buildcache import build_key

    cases = [c for c in expand_matrix(load_config(_write(tmp_path, BASE))) if c.design.name == "edge_core"]
    keys = {build_key(build_request(c, "v1")) for c in cases}
    assert len(keys) == 1  # images, timings, stalls and seeds are run-time inputs
    stream = [c for c in expand_matrix(load_config(_write(tmp_path, BASE))) if c.design.name == "stream_core"]
    # the stream core's HEIGHT parameter follows the frame: one build per frame height
    assert len({build_key(build_request(c, "v1")) for c in stream}) == 2


def test_bundled_configs_load():
    root = Path(__file__).resolve().parents[1] / "sim"
    for name in ("demo.toml", "bugs.toml", "full.toml"):
        cfg = load_config(root / name)
        assert expand_matrix(cfg)
    bugs = expand_matrix(load_config(root / "bugs.toml"))
    assert all(c.design.bug for c in bugs)
    full = expand_matrix(load_config(root / "full.toml"))
    assert {c.simulator for c in full if c.design.name == "edge_core_vhdl"} == {"ghdl"}


def test_a_ghdl_build_belongs_to_its_source_path(tmp_path):
    # GHDL (mcode) reads the analysed files again at elaboration (checked with GHDL 2.0: `ghdl -a` in one
    # folder, the source folder deleted, then `ghdl -r` says "cannot load entity"); Icarus and Verilator
    # builds are self-contained, so a copy of the same files elsewhere reuses theirs.
    from vkit.sim.buildcache import BuildRequest, build_key

    a, b = tmp_path / "a" / "belt.vhd", tmp_path / "b" / "belt.vhd"
    for p in (a, b):
        p.parent.mkdir()
        p.write_text("entity belt is end;\n")
    for sim, same in (("ghdl", False), ("icarus", True)):
        ka, kb = (build_key(BuildRequest(sim, "v1", "belt", (p,), "vhdl")) for p in (a, b))
        assert (ka == kb) is same, sim
