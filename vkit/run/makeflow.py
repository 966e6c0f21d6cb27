"""cocotb's Makefile flow, fed from the config: the build of one design on one simulator as make variables.

``Makefile.vkit`` (written by ``vkit init``) holds no sources, parameters or defines of its own. At make
time it ``-include``s a small generated file, ``.vkit-make/<design>-<sim>.mk``, written by
``vkit make-vars CONFIG --design D --sim S --out FILE``. The values come from
:func:`vkit.run.builds.build_request`, the very function ``vkit run`` builds with, and are formatted by
cocotb's own runner (the argument spelling ``vkit run``'s builds get), so both flows build the same model.
The file is rewritten only when its text changes; a second file, ``<design>-<sim>.build.json``, holds
just the build inputs and changes only when they do, so editing the stimulus never rebuilds the model.
"""

from __future__ import annotations

import json
import shlex
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

from cocotb_tools.runner import get_runner

import vkit
from vkit.core.errors import ConfigError
from vkit.core.validate import fail, suggest
from vkit.run import builds
from vkit.run.config import Case, Config, expand_matrix, load_config
from vkit.sim.simulators import LANGUAGES, SIMULATORS

__all__ = ["MakeBuild", "VARS_FOLDER", "design_cases", "make_build", "make_vars_text", "write_make_vars"]

VARS_FOLDER = ".vkit-make"
"""Folder next to ``Makefile.vkit`` that holds the generated variable files."""


def design_cases(config: Config, design: str, simulator: str) -> list[Case]:
    """The cases of ``design`` on ``simulator``; a design that names other simulators runs their stimuli here.

    Raises:
        ConfigError: the config has no design of that name, or the simulator does not compile its language.
    """
    if design not in config.designs:
        raise fail(f"config {config.path}", "design", design, "not a design of the config", suggest(design, config.designs))
    d = config.designs[design]
    if simulator not in SIMULATORS or d.language not in LANGUAGES[simulator]:
        able = [s for s in SIMULATORS if d.language in LANGUAGES[s]]
        raise ConfigError(f"design {design}: simulator {simulator!r} does not build {d.language}; use one of {', '.join(able)}")
    cases = [c for c in expand_matrix(config, [simulator]) if c.design.name == design]
    if not cases:
        d.simulators = [simulator]
        cases = [c for c in expand_matrix(config, [simulator]) if c.design.name == design]
    return cases


@dataclass(frozen=True)
class MakeBuild:
    """One design's build on one simulator as cocotb's Makefile variables want it.

    Attributes:
        design, simulator: what it is for.
        top, language: ``COCOTB_TOPLEVEL`` and ``TOPLEVEL_LANG``.
        sources: source files in compile order (absolute).
        compile_args: build arguments, parameters, defines and include folders (``COMPILE_ARGS``).
        run_args: run-time arguments (``SIM_ARGS``: GHDL takes its generics when it runs).
        data_files: files the design reads while it runs (a ``$readmemh`` table): a rebuild follows them.
        timescale: time unit and precision (Icarus and Verilator).
        frame_size: the (width, height) the frame parameters were set for, or None when there are none.
    """

    design: str
    simulator: str
    top: str
    language: str
    sources: tuple[str, ...]
    compile_args: tuple[str, ...]
    run_args: tuple[str, ...]
    data_files: tuple[str, ...]
    timescale: tuple[str, str]
    frame_size: tuple[int, int] | None

    def inputs(self) -> dict[str, object]:
        """The build inputs as one JSON-able table (the ``.build.json`` beside the variables)."""
        return {"design": self.design, "simulator": self.simulator, "top": self.top, "language": self.language,
                "sources": list(self.sources), "compile_args": list(self.compile_args),
                "run_args": list(self.run_args), "data_files": list(self.data_files),
                "timescale": list(self.timescale), "vkit": vkit.__version__}


def _tool_args(simulator: str, top: str, parameters: Mapping[str, str], defines: Mapping[str, str],
               includes: Sequence[Path]) -> tuple[list[str], list[str]]:
    """(compile, run) arguments spelled by cocotb's runner for ``simulator``, as ``vkit run``'s builds get them."""
    runner = get_runner(simulator)
    runner.hdl_toplevel = top  # Icarus names parameters <top>.<name>
    params = runner._get_parameter_options(dict(parameters))  # noqa: SLF001 - the runner's own spelling
    if simulator == "ghdl":  # generics are given when the model runs (see vkit.run.simulate)
        return [], params
    rest = runner._get_define_options(dict(defines)) + runner._get_include_options(list(includes))  # noqa: SLF001
    return [*params, *rest], []


def make_build(config: Config, design: str, simulator: str) -> MakeBuild:
    """The build of ``design`` on ``simulator`` that ``vkit run`` makes, for cocotb's Makefile flow.

    Frame parameters follow the first case's frame size: make builds one model per design and simulator.

    Raises:
        ConfigError: no such design, or a simulator that does not build its language.
    """
    cases = design_cases(config, design, simulator)
    if not cases:
        raise ConfigError(f"design {design}: the config gives it no cases on {simulator}; add a stimulus")
    case = cases[0]
    request = builds.build_request(case, tool_version="make")
    compile_args, run_args = _tool_args(simulator, request.top, dict(request.parameters), dict(request.defines),
                                        list(request.include_dirs))
    if simulator == "ghdl":
        compile_args = list(request.build_args)
    else:
        compile_args = [*request.build_args, *compile_args]
    d = case.design
    return MakeBuild(
        design=design, simulator=simulator, top=request.top, language=request.language,
        sources=tuple(str(s) for s in request.sources), compile_args=tuple(compile_args),
        run_args=tuple(run_args), data_files=tuple(str(p) for p in request.data_files),
        timescale=builds.TIMESCALE, frame_size=(case.width, case.height) if d.frame_parameters else None,
    )


def _make_words(args: Sequence[str]) -> str:
    """Arguments as one make value: shell-quoted (cocotb's makefiles pass them through a shell), ``$`` doubled."""
    return " ".join(shlex.quote(a) for a in args).replace("$", "$$")


def make_vars_text(build: MakeBuild, config_path: Path, depends: Sequence[Path]) -> str:
    """The generated make file: the build as ``VKIT_*`` variables, and what it was made from."""
    lines = [
        f"# Written by `vkit make-vars` (vkit {vkit.__version__}) from {config_path}: design {build.design}, "
        f"simulator {build.simulator}.",
        "# Do not edit: edit the config. Makefile.vkit remakes this file when the config or vkit changes.",
        f"VKIT_VARS_FROM := {_make_words([str(p) for p in depends])}",
        f"VKIT_LANGUAGE := {build.language}",
        f"VKIT_TOPLEVEL := {build.top}",
        f"VKIT_SOURCES := {_make_words(build.sources)}",
        f"VKIT_COMPILE_ARGS := {_make_words(build.compile_args)}",
        f"VKIT_SIM_ARGS := {_make_words(build.run_args)}",
        f"VKIT_DATA_FILES := {_make_words(build.data_files)}",
        f"VKIT_TIMEUNIT := {build.timescale[0]}",
        f"VKIT_TIMEPRECISION := {build.timescale[1]}",
    ]
    if build.frame_size is not None:
        w, h = build.frame_size
        lines.append(f"# frame parameters set for {w}x{h} pixels (the first case); cases of other sizes need `vkit run`")
    return "\n".join(lines) + "\n"


def _vkit_files() -> list[Path]:
    """vkit's own files the variables depend on: a new vkit (or an edit of the build code) remakes them."""
    return [Path(vkit.__file__).resolve(), Path(builds.__file__).resolve(), Path(__file__).resolve()]


def _write_if_changed(path: Path, text: str, *, touch: bool) -> bool:
    """Write ``text`` unless ``path`` already holds it (then only touch it when ``touch``); True if written."""
    if path.exists() and path.read_text(encoding="utf-8") == text:
        if touch:
            path.touch()
        return False
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    tmp.replace(path)
    return True


def write_make_vars(config_path: str | Path, design: str, simulator: str, out: str | Path | None = None) -> Path:
    """Write the make variables of ``design`` on ``simulator`` and their ``.build.json``; the variables file.

    The variables file is touched even when its text is unchanged (make then knows it is up to date);
    the ``.build.json`` (a prerequisite of the model's build) changes only when a build input does.

    Args:
        config_path: the config.
        design, simulator: which build.
        out: the variables file (default: ``.vkit-make/<design>-<simulator>.mk`` beside the config).

    Raises:
        ConfigError: the config cannot be read, or the design or simulator is not one it can build.
    """
    config = load_config(config_path)
    build = make_build(config, design, simulator)
    target = Path(out) if out is not None else config.path.parent / VARS_FOLDER / f"{design}-{simulator}.mk"
    depends = [config.path.resolve(), *_vkit_files()]
    inputs = json.dumps(build.inputs(), indent=2) + "\n"
    _write_if_changed(target.with_name(target.stem + ".build.json"), inputs, touch=False)
    _write_if_changed(target, make_vars_text(build, config.path.resolve(), depends), touch=True)
    return target
