"""Run a regression: build each design once (cached), simulate every case, score it and write the reports.

:func:`run` takes a loaded :class:`~vkit.run.config.Config`, expands its case matrix and hands the
cases with one frozen :class:`~vkit.run.options.RunOptions` to :func:`vkit.run.pool.run_cases`. The
steps live in their own modules: :mod:`~vkit.run.builds` (the build phase and the build cache),
:mod:`~vkit.run.case` (one case: prepare, simulate, judge, report), :mod:`~vkit.run.pool` (workers,
``-j``), :mod:`~vkit.run.results` (the result types). This module keeps the names earlier releases
exported from it (``make_frames``, ``run_cases``, ...). A case that fails to build or crashes still gets
a report entry: nothing is lost.

Output folder layout (every path stays inside ``out_dir``)::

    out_dir/report.json, junit.xml, summary.txt, builds.json
    out_dir/<case>/verdict.json, frameNNN_*.png      (vkit.report.writers)
    out_dir/<case>/sim/frames.npy, case.json, capture.npz, sim.log
"""

from __future__ import annotations

import importlib.resources
import sys
from pathlib import Path
from typing import Any, TextIO

from vkit.core.errors import ConfigError
from vkit.core.validate import want_int
from vkit.core.vocab import DRIVE_MODES, WAVE_MODES
from vkit.report.page import write_index
from vkit.report.writers import merge_reports
from vkit.run.builds import build_design, build_fast_design, build_request, build_wave_design
from vkit.run.case import rerun_command, run_one_case
from vkit.run.config import (SHARD_AUTO, Config, dropped_designs, expand_matrix, load_config, select_cases,
                             shard_cases, shard_from_environment)
from vkit.run.inputs import check_ports, make_frames, make_sim_case
from vkit.run.options import RunOptions
from vkit.run.pool import run_cases
from vkit.run.results import CaseResult, RunResult, exit_code_for
from vkit.run.waves import wave_window

__all__ = [
    "CaseResult",
    "RunResult",
    "RunOptions",
    "run",
    "demo_config",
    "run_cases",
    "merge",
    "make_frames",
    "build_request",
    "build_design",
    "build_fast_design",
    "build_wave_design",
    "make_sim_case",
    "run_one_case",
    "exit_code_for",
    "check_ports",
    "wave_window",
    "rerun_command",
    "WAVE_MODES",
    "DRIVE_MODES",
    "PATHS",
]

PATHS = DRIVE_MODES
"""The drive modes under their earlier name (:data:`vkit.core.vocab.DRIVE_MODES`)."""


def run(config: Config, jobs: int | None = None, shard: tuple[int, int] | str | None = None,
        only: str | list[str] | None = None, progress: bool = True, *, out_dir: str | Path | None = None,
        simulators: list[str] | None = None, stream: TextIO | None = None, waves: str | None = None,
        drive: str | None = None, new_out: bool = False) -> RunResult:
    """Run a config's regression.

    Args:
        config: a loaded config.
        jobs: cases run at once, each in a process of its own (default: ``[run] jobs``; >= 1, cut to the
            number of cases and to :data:`vkit.run.pool.JOBS_PER_CPU` per CPU).
        shard: ``(K, N)`` or ``"K/N"``: run only case ``i`` with ``i % N + 1 == K`` of the sorted matrix;
            ``"auto"``: K and N from the array job or CI matrix (:func:`vkit.run.config.shard_from_environment`).
        only: keep cases whose id matches (glob or substring; a list = any).
        progress: print a line per build and per case (``[3/12] id pass 1.2 s``).
        out_dir: report folder (default ``[run] out_dir``).
        simulators: replaces ``[run] simulators``.
        stream: where progress goes (default stdout).
        waves: ``"failing"``, ``"all"`` or ``"off"`` (default ``[run] waves``): which cases are rerun
            with a dump of a clock window around their first mismatch (Icarus).
        drive: ``"clock"``, ``"fast"`` or ``"native"`` (default ``[run] path``); see
            :data:`vkit.core.vocab.DRIVE_MODES`.
        new_out: when another run is writing the report folder, write a sibling (``out-2``) instead of
            stopping with an error.

    Returns:
        A :class:`RunResult`; ``exit_code`` is 0 all pass, 1 a design failed, 2 a case errored, 130 / 143
        when Ctrl-C / SIGTERM stopped the run (the report then holds the finished cases and the
        interrupted ones).

    Raises:
        ConfigError / ToolError: nothing could run (empty selection, missing simulator, bad option).
    """
    if jobs is not None:
        want_int("command line", "--jobs", jobs, 1)
    if shard == SHARD_AUTO:
        shard, source = shard_from_environment()
        if progress:
            print(f"shard {shard[0]}/{shard[1]} from the {source} variables", file=stream or sys.stdout)
    cases = shard_cases(select_cases(expand_matrix(config, simulators), only), shard)
    note = dropped_designs(config, simulators)
    if note is not None and progress:
        print(note, file=stream or sys.stdout)
    if not cases:
        raise ConfigError(f"shard {shard} of {config.path.name} holds no case; use fewer shards")
    options = RunOptions.from_settings(config.run, config_path=config.path, out_dir=out_dir, jobs=jobs,
                                       waves=waves, drive=drive)
    result = run_cases(cases, options, progress=progress, stream=stream, new_out=new_out)
    result.exit_from = config.run.exit_code
    result.report_files["index"] = str(write_index(result.out_dir, title=f"vkit run: {config.path.name}"))
    return result


def demo_config() -> Config:
    """The bundled sample regression (``vkit demo``): the sample designs on a few small patterns."""
    return load_config(Path(str(importlib.resources.files("vkit.regressions") / "demo.toml")))


def merge(out_dir: str | Path, reports: list[str | Path]) -> tuple[dict[str, Any], int]:
    """Merge shard ``report.json`` files into one report in ``out_dir``; returns (report, exit code).

    Raises:
        ConfigError: no report given, one is not a vkit report (``report.schema.json``), the shards hold
            no case at all, or ``out_dir`` is a file or cannot be written. Nothing is written then.
    """
    if not reports:
        raise ConfigError("merge: no report.json given; pass the shard reports (or their folders)")
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise ConfigError(f"merge: output folder {out} is a file; give a folder (new or existing) for the merged report")
    if not merge_reports(list(reports))["cases"]:  # read and checked without writing anything
        raise ConfigError(f"merge: the {len(reports)} report(s) hold no case; a shard that ran nothing is a broken "
                          "shard: check each shard's run")
    try:
        merged = merge_reports(list(reports), out)
    except OSError as exc:
        raise ConfigError(f"merge: cannot write to {out} ({exc.strerror or exc}); pick a writable folder") from None
    write_index(out_dir, title=f"vkit merge: {len(reports)} shard(s)")
    statuses = [c.get("status") or c.get("verdict", {}).get("status", "error") for c in merged["cases"]]
    return merged, exit_code_for(statuses)
