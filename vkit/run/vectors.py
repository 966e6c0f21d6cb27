"""Vector export of one regression case, and the replay of a capture file into a live run's report.

``export_vectors`` writes everything a plain-HDL testbench needs to run a case without Python (the
harness, ``stim.bin``/``stim.hex``, ``expected.hex``, ``tb_vkit.v`` or ``tb_vkit.vhd``, and the commands
in ``README.txt``) plus what it takes to judge the result later (``case.json``, ``frames.npy``,
``spec.toml``, ``vectors.json``). ``replay`` reads the capture file that testbench wrote and gives the
same verdict, report and PNGs as a live ``vkit run`` of the case.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from vkit.core.errors import ConfigError
from vkit.run.config import Case, Config, expand_matrix, select_cases

__all__ = ["ExportedCase", "export_vectors", "find_case", "replay"]

_INFO = "vectors.json"


@dataclass
class ExportedCase:
    """Where an exported case went and how to run it.

    Attributes:
        out_dir: the export folder.
        testbench: the self-checking testbench file.
        commands: simulator name -> the commands that build and run it (argument lists).
    """

    out_dir: Path
    testbench: Path
    commands: dict[str, list[list[str]]]


def find_case(config: Config, case_id: str, simulators: list[str] | None = None) -> Case:
    """The one case of ``config`` that ``case_id`` selects (a whole case id, as summary.txt lists it).

    Raises:
        ConfigError: ``case_id`` selects no case or several (the message lists a few).
    """
    cases = select_cases(expand_matrix(config, simulators), case_id)
    if len(cases) != 1:
        listed = ", ".join(c.id for c in cases[:5]) + (" ..." if len(cases) > 5 else "")
        raise ConfigError(f"export: {case_id!r} selects {len(cases)} cases ({listed or 'none'}); "
                          "give one whole case id (see summary.txt of a run)")
    return cases[0]


def export_vectors(case: Case, out_dir: str | Path) -> ExportedCase:
    """Export ``case`` (one case of a config's matrix) as vectors and a self-checking testbench.

    Raises:
        ConfigError: the design's spec and pixel format disagree, or the harness cannot be made.
    """
    from vkit.run.export import export_case
    from vkit.model.pipeline import run_model
    from vkit.run.inputs import make_frames, make_sim_case

    d = case.design
    out = Path(out_dir).resolve()
    spec = d.pipeline_spec()
    frames = make_frames(case)
    expected = [run_model(spec, f) for f in frames]
    simcase = make_sim_case(case, out, frames)
    simcase.capture_file = str(out / "capture.npz")
    simcase.to_json(out / "case.json")
    (out / "spec.toml").write_text(spec.to_toml())
    result = export_case(
        simcase, out, d.top, d.sources, expected, language=d.language,
        parameters=case.build_parameters(), defines=d.defines,
    )
    info = {
        "case": case.id, "design": d.name, "simulator": case.simulator, "tolerance_lsb": d.tolerance_lsb,
        "declared_latency_clocks": case.declared_latency_clocks(), "align": d.align, "seeds": case.seeds(),
        "commands": {sim: [list(c) for c in cmds] for sim, cmds in result.commands.items()},
    }
    (out / _INFO).write_text(json.dumps(info, indent=2) + "\n")
    return ExportedCase(out, Path(result.testbench), dict(result.commands))


def _check_complete(capture_file: Path) -> None:
    """A capture file the testbench did not finish is refused as such, before the design is blamed."""
    from vkit.sim.fast.capture_file import truncation

    if capture_file.is_dir():
        raise ConfigError(f"capture file {str(capture_file)!r} is a directory; name the capture.bin or capture.txt in it")
    if not capture_file.is_file():
        raise ConfigError(f"capture file {str(capture_file)!r} does not exist; run the exported testbench first "
                          "(see README.txt), or name the capture file")
    why = truncation(capture_file)
    if why is not None:
        raise ConfigError(f"capture file {str(capture_file)!r} is truncated: {why}; the testbench did not finish "
                          "writing it (stopped early, or the file was cut): rerun it to the end, then replay")


def replay(export_dir: str | Path, capture_file: str | Path | None = None,
           out_dir: str | Path | None = None) -> tuple[Any, dict[str, str]]:
    """Judge the capture an exported testbench wrote, exactly as a live run judges its capture.

    Args:
        export_dir: a folder written by :func:`export_vectors`.
        capture_file: the testbench's capture (default: ``capture.bin`` or ``capture.txt`` there).
        out_dir: report folder (default: ``<export_dir>/report``).

    Returns:
        ``(verdict, report_files)``: the scoreboard's verdict and the paths of report.json, junit.xml
        and summary.txt.

    Raises:
        ConfigError: the folder is not an export, or the capture file is missing, truncated (no end-of-run
            event) or not a vkit capture file.
    """
    from vkit.run.export import read_capture
    from vkit.model.pipeline import PipelineSpec, run_model
    from vkit.report.writers import case_entry, write_case_report, write_run_report
    from vkit.check.scoreboard import score
    from vkit.sim.case import SimCase

    src = Path(export_dir).resolve()
    if not (src / _INFO).is_file():
        raise ConfigError(f"{str(src)!r} is not a vkit export (no {_INFO}); write one with `vkit export`")
    info = json.loads((src / _INFO).read_text())
    simcase = SimCase.from_json(src / "case.json")
    simcase.frames_file = str(src / "frames.npy")  # the folder may have moved since the export
    if capture_file is None:
        found = [p for p in (src / "capture.bin", src / "capture.txt") if p.is_file()]
        if not found:
            raise ConfigError(f"no capture.bin or capture.txt in {str(src)!r}; run the exported testbench there "
                              "first (see README.txt), or name the capture file")
        capture_file = found[0]
    _check_complete(Path(capture_file))
    spec = PipelineSpec.from_toml(src / "spec.toml")
    frames = np.load(src / "frames.npy")
    expected = [run_model(spec, f) for f in frames]
    capture = read_capture(capture_file, simcase)
    verdict = score(
        expected, capture, tolerance_lsb=int(info.get("tolerance_lsb", 0)),
        declared_latency_clocks=info.get("declared_latency_clocks"), align=info.get("align", "exact"),
        spec=spec, images=list(frames),
    )
    out = Path(out_dir).resolve() if out_dir is not None else src / "report"
    meta = {"replayed_from": str(Path(capture_file).resolve()), "export_dir": str(src)}
    files = write_case_report(info["case"], verdict, expected, capture, out, meta=meta)
    entry = case_entry(info["case"], verdict, simulator=info.get("simulator"), seeds=info.get("seeds"), files=files,
                       meta=meta)
    return verdict, write_run_report([entry], out)
