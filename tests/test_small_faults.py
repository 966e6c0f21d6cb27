"""The small faults: each one line, exit code 2, nothing left behind, and the command line obeyed."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from PIL import Image

from conftest import SAMPLE_RTL
from vkit.cli import main
from vkit.run.config import dropped_designs, expand_matrix, load_config

PORTS = ", ".join(f'{r} = "{p}"' for r, p in (
    ("clock", "clk"), ("reset", "rst"), ("in_vsync", "in_vsync"), ("in_hsync", "in_hsync"), ("in_de", "in_de"),
    ("in_valid", "in_valid"), ("in_data", "in_data"), ("out_vsync", "out_vsync"), ("out_hsync", "out_hsync"),
    ("out_de", "out_de"), ("out_valid", "out_valid"), ("out_data", "out_data")))
BLUR = [str(SAMPLE_RTL / "window3x3.v"), str(SAMPLE_RTL / "blur_core.v")]


def _config(tmp_path: Path, *, sources: list[str] = BLUR, run: str = "", design: str = "",
            stimulus: str = 'patterns = ["impulse"]') -> Path:
    p = tmp_path / "vkit.toml"
    p.write_text(f'[run]\nsimulators = ["icarus"]\nout_dir = "out"\n{run}\n[designs.d]\ntop = "blur_core"\n'
                 f'sources = {json.dumps(sources)}\nspec = "blur"\nports = {{ {PORTS} }}\n{design}\n'
                 f'[stimulus]\n{stimulus}\n')
    return p


def _one_line(capsys: pytest.CaptureFixture[str], *argv: str) -> str:
    assert main(list(argv)) == 2
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    (line,) = err.strip().splitlines()
    return line


def test_no_probe_file_is_left_in_the_output_folder(tmp_path):
    """Writability is proven by the run's lock file (which says who writes the folder), not a probe file."""
    from vkit.run.outlock import lock_out_dir

    out = tmp_path / "out"
    with lock_out_dir(out):
        pass
    assert [p.name for p in out.iterdir()] == [".vkit-run.lock"]


def test_a_source_that_is_a_directory_is_called_one(tmp_path, capsys):
    folder = tmp_path / "rtl"
    folder.mkdir()
    line = _one_line(capsys, "run", str(_config(tmp_path, sources=[str(folder)])))
    assert line == (f"vkit: error: vkit.toml [designs.d]: sources = {str(folder)!r} is a directory ({folder}), not a "
                    f"file; name the files in it, e.g. {str(folder) + '/*.v'!r}")


def test_image_pixel_limit_is_a_config_setting(tmp_path, capsys):
    img = tmp_path / "belt.png"
    Image.fromarray(np.zeros((40, 50), np.uint8)).save(img)
    stimulus = f'images = ["{img}"]\nmax_image_pixels = 1999'
    line = _one_line(capsys, "run", str(_config(tmp_path, stimulus=stimulus)))
    assert line == (f"vkit: error: image {img}: claims 2000 pixels, over the limit of 1999 (decompression-bomb "
                    "guard); raise [stimulus] max_image_pixels (now 1999) if you trust the file")
    (case,) = expand_matrix(load_config(_config(tmp_path, stimulus=f'images = ["{img}"]\nmax_image_pixels = 2000')))
    assert case.max_image_pixels == 2000 and (case.width, case.height) == (50, 40)


def test_cache_dir_that_is_a_file(tmp_path, capsys):
    blocker = tmp_path / "cache"
    blocker.write_text("not a folder")
    line = _one_line(capsys, "run", str(_config(tmp_path, run=f'cache_dir = "{blocker}"')))
    assert line == (f"vkit: error: build cache: cache_dir = {str(blocker)!r} is a file, not a folder; point [run] "
                    "cache_dir (or $VKIT_CACHE_DIR) at a folder")
    line = _one_line(capsys, "run", str(_config(tmp_path, run=f'cache_dir = "{blocker / "sub"}"')))
    assert f"lies under {blocker}, which is a file, not a folder" in line


def test_package_paths_stay_inside_the_package(tmp_path, capsys):
    cfg = tmp_path / "vkit.toml"
    cfg.write_text('[run]\nsimulators = ["icarus"]\n[[import]]\nmanifest = "package:vkit.sample_rtl/../../x.toml"\n'
                   '[stimulus]\npatterns = ["impulse"]\n')
    line = _one_line(capsys, "run", str(cfg))
    assert line.startswith("vkit: error: path 'package:vkit.sample_rtl/../../x.toml' leaves package 'vkit.sample_rtl' "
                           "(it resolves to ")
    assert line.endswith("); name a file inside the package, or give a plain path")


def test_the_command_line_simulators_win_over_a_designs_own(tmp_path):
    """A design naming its own simulators (an override of [run]) runs on what --sim asks for."""
    config = load_config(_config(tmp_path, design='simulators = ["verilator"]'))
    assert {c.simulator for c in expand_matrix(config)} == {"verilator"}  # no --sim: the design's own list
    assert {c.simulator for c in expand_matrix(config, ["icarus"])} == {"icarus"}
    assert dropped_designs(config, ["icarus"]) is None


def test_designs_left_out_by_sim_are_named_in_one_note(tmp_path, capsys):
    vhdl = [str(SAMPLE_RTL / "edge_root_table_pkg.vhd"), str(SAMPLE_RTL / "edge_core.vhd")]
    text = _config(tmp_path).read_text().replace("[stimulus]", (
        f'[designs.v]\ntop = "edge_core"\nsources = {json.dumps(vhdl)}\nspec = "edge"\npixel_format = "rgb888"\n'
        f'ports = {{ {PORTS} }}\n[stimulus]'))
    cfg = tmp_path / "vkit.toml"
    cfg.write_text(text)
    config = load_config(cfg)
    assert {c.design.name for c in expand_matrix(config, ["icarus"])} == {"d"}
    assert dropped_designs(config, ["icarus"]) == ("note: --sim icarus leaves out design(s) v (vhdl runs on ghdl)")


def test_model_command_names_its_own_image_pixel_option(tmp_path, capsys):
    img = tmp_path / "belt.png"
    Image.fromarray(np.zeros((40, 50), np.uint8)).save(img)
    line = _one_line(capsys, "model", "blur", str(img), "--max-image-pixels", "100", "--out", str(tmp_path / "m"))
    assert line == (f"vkit: error: image {img}: claims 2000 pixels, over the limit of 100 (decompression-bomb guard); "
                    "raise --max-image-pixels (now 100) if you trust the file")
    assert main(["model", "blur", str(img), "--max-image-pixels", "2000", "--out", str(tmp_path / "m")]) == 0
