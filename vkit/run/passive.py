"""Passive scoring from a config: a waveform dump scored offline, and the report both passive modes write.

The design's entry in the config says what it computes (spec, pixel format, tolerance, alignment) and
names its ports (the signal map); ``instance`` (or ``--scope``) says where it sits inside a larger top.
Nothing is driven: input frames are rebuilt from what the design received.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from vkit.check.passive import DeclaredLatency, FirstFrame, PassiveOptions, PassiveScoreboard
from vkit.check.results import Verdict
from vkit.core.errors import ConfigError
from vkit.report.page import write_index
from vkit.report.writers import case_entry, write_case_report, write_run_report
from vkit.run.case import mutant_diagnosis, named_by_mutant
from vkit.run.config import Config, DesignConfig
from vkit.video.capture import Capture
from vkit.video.observe import SIDE_ROLES
from vkit.video.timing import PRESETS, VideoTiming, preset

__all__ = ["PassiveOutcome", "pick_design", "side_roles", "new_scoreboard", "write_passive_report", "score_dump"]


@dataclass
class PassiveOutcome:
    """What a passive run ends with.

    Attributes:
        verdict: the run's verdict over every frame scored.
        files: report paths (``json``, ``junit``, ``summary``, ``index``).
        problems: one line per frame that could not be scored (the run ended mid-frame, ...).
        summary: the running summary's last line.
    """

    verdict: Verdict
    files: dict[str, str]
    problems: list[str] = field(default_factory=list)
    summary: str = ""


def pick_design(config: Config, name: str | None) -> DesignConfig:
    """The design ``name`` of ``config``, or its only design (seeded-bug variants aside)."""
    if name is not None:
        if name not in config.designs:
            raise ConfigError(f"{config.path}: no design {name!r}; designs: {', '.join(config.designs)}; "
                              "give one of them with --design")
        return config.designs[name]
    plain = [d for d in config.designs.values() if d.bug is None]
    if len(plain) != 1:
        raise ConfigError(f"{config.path}: {len(plain)} designs ({', '.join(d.name for d in plain)}); name the one "
                          "to score with --design")
    return plain[0]


def side_roles(design: DesignConfig) -> dict[str, dict[str, str]]:
    """``{"in": {role: port}, "out": {role: port}, "clock": {...}}``: the design's ports by side, roles without
    the side prefix; only the roles a passive scoreboard reads.

    Raises:
        ConfigError: a role the passive scoreboard needs is not mapped (out_vsync for video).
    """
    required, optional = SIDE_ROLES[design.family]
    sides: dict[str, dict[str, str]] = {"in": {}, "out": {}}
    for side in sides:
        for role in required + optional:
            port = design.ports.get(f"{side}_{role}")
            if port:
                sides[side][role] = port
            elif role in required and not (side == "out" and role == "vsync"):  # frames end after the input's lines
                raise ConfigError(f"design {design.name}: role {side}_{role} is not mapped; a passive scoreboard "
                                  f"needs it to tell where frames end: map it in [designs.{design.name}.ports]")
    clock = {"clock": design.ports["clock"]}
    if design.ports.get("reset"):
        clock["reset"] = design.ports["reset"]
    sides["clock"] = clock
    return sides


def new_scoreboard(design: DesignConfig, *, max_listed: int = 20, out_data_bits: int | None = None,
                   timing: str | None = None) -> PassiveScoreboard:
    """A passive scoreboard for ``design``: its spec, family, bus layout (pixel format, component order, pixels a
    clock, lane order), pin polarity, tolerance and alignment, as the driven flow reads them from the config.

    Args:
        design: the design's config entry.
        max_listed: failing pixels listed in the verdict.
        out_data_bits: width of the output data word, bits (read off the simulator or the dump; splits a word
            of several pixels into its lanes).
        timing: a timing preset name (``hd1280x720p60``, ``tiny32x24``, ...) the run should follow, or None:
            frame sizes and hsync pulses a vsync period are then checked against it.
    """
    given = preset(timing) if timing else None
    options = PassiveOptions(timing=given, tolerance_lsb=design.tolerance_lsb, align=design.align,
                             max_listed=max_listed, active_high=tuple(sorted(design.port_polarity.items())),
                             out_data_bits=out_data_bits, declared_latency=_declared_latency(design, given))
    return PassiveScoreboard(design.pipeline_spec(), design.family, design.bus_layout(), options)


def _declared_latency(design: DesignConfig, given: VideoTiming | None) -> DeclaredLatency:
    """The latency ``design`` declares for the first frame watched, ``(clocks, samples)``, by the driven run's rule
    (:meth:`DesignConfig.declared_latency_clocks`, only on a steady frame). A video frame's timing is the one
    given, else the timing preset of its active size (when exactly one has that size); a stream's is named
    by its size, as the driven case names it."""
    def declared(seen: FirstFrame) -> tuple[int | None, int | None]:
        if not seen.steady:
            return None, None
        if design.family == "stream":
            return (design.declared_latency_clocks(f"tiny{seen.width}x{seen.height}", seen.width, None),
                    design.declared_latency_samples(f"{seen.width}x{seen.height}"))
        timing = given or _preset_of_size(seen.width, seen.height)
        if timing is None:
            return None, None
        return (design.declared_latency_clocks(timing.name, seen.width, timing.h_total),
                design.declared_latency_samples(timing.name))

    return declared


def _preset_of_size(width: int, height: int) -> VideoTiming | None:
    """The timing preset of active size ``width`` x ``height``, when exactly one has it."""
    found = [t for t in PRESETS.values() if (t.h_active, t.v_active) == (width, height)]
    return found[0] if len(found) == 1 else None


def write_passive_report(case_id: str, board: PassiveScoreboard, out_dir: str | Path,
                         meta: Mapping[str, Any]) -> tuple[Verdict, dict[str, str]]:
    """The run's verdict (with the spec-mutant diagnosis a driven run gets), report.json, junit.xml,
    summary.txt, the failing frames' pictures and index.html under ``out_dir``."""
    verdict = board.verdict()
    images = {s.index: s.image for s in board.kept}
    found = mutant_diagnosis(verdict, board.spec, images)
    verdict = named_by_mutant(verdict, found)
    out = Path(out_dir).resolve()
    meta = {**meta, "passive": True, "frames_scored": board.frames_scored, "problems": list(board.problems)}
    expected = [s.expected for s in board.kept]
    files = write_case_report(case_id, verdict, expected, Capture(), out, meta=meta)
    entry = case_entry(case_id, verdict, simulator=meta.get("simulator"), files=files, meta=meta)
    if found is not None:
        entry["diagnosis_by_mutant"] = found.to_dict()
    report = write_run_report([entry], out)
    report["index"] = str(write_index(out, title=f"vkit passive: {case_id}"))
    return verdict, report


def _dump_paths(design: DesignConfig, scope: str | None, overrides: Mapping[str, str]) -> dict[str, dict[str, str]]:
    """Dump signal path of every role the scoreboard reads: ``scope.port``, or the override for the role."""
    sides = side_roles(design)
    prefix = f"{scope.rstrip('.')}." if scope else ""
    paths = {side: {role: prefix + port for role, port in roles.items()} for side, roles in sides.items()}
    for role, path in overrides.items():
        side, _, bare = role.partition("_")
        if role in ("clock", "reset"):
            paths["clock"][role] = path
        elif side in ("in", "out") and bare in SIDE_ROLES[design.family][0] + SIDE_ROLES[design.family][1]:
            paths[side][bare] = path
        else:
            raise ConfigError(f"--signal {role}={path}: {role!r} is not a role the passive scoreboard reads; use "
                              "clock, reset, in_<role> or out_<role> of the design's family")
    return paths


def score_dump(config: Config, dump: str | Path, *, design: str | None = None, scope: str | None = None,
               signals: Mapping[str, str] | None = None, out_dir: str | Path | None = None,
               timing: str | None = None) -> PassiveOutcome:
    """Score a waveform dump of a run: rebuild the input frames, run the model, score every output frame.

    Args:
        config: the config naming the design (spec, ports, polarity of reset).
        dump: a VCD, FST or GHW file.
        design: the design's name in the config (default: its only design).
        scope: hierarchical path of the design's instance in the dump (default: the design's ``instance``
            key; without either, each port is found by its name alone when that is unique).
        signals: role -> full dump path for roles whose signal is not ``scope.port``.
        out_dir: report folder (default: ``<dump stem>-vkit`` beside the dump).
        timing: a timing preset the run should follow (frame sizes and hsync pulses a vsync period are checked
            against it), or None.

    Raises:
        ConfigError: the dump cannot be read, lacks a signal, or holds no complete frame.
    """
    from vkit.sim.dump import open_dump

    t0 = time.monotonic()
    d = pick_design(config, design)
    wave = open_dump(dump)
    paths = _dump_paths(d, scope if scope is not None else d.instance, signals or {})
    found = {side: {role: wave.find(p, f"role {side + '_' if side != 'clock' else ''}{role}")
                    for role, p in roles.items()} for side, roles in paths.items()}
    clock = found["clock"]["clock"]
    reset = found["clock"].get("reset")
    start = (reset, 1 if d.reset_active_high else 0) if reset else None
    board = new_scoreboard(d, out_data_bits=wave.width(found["out"]["data"]), timing=timing)
    for chunk in wave.levels(clock, {"in": found["in"], "out": found["out"]}, start_after=start):
        board.feed(chunk["in"], chunk["out"])
    board.finish()
    if board.frames_scored == 0:
        raise ConfigError(f"{Path(dump).name}: nothing to score: {'; '.join(board.problems)}")
    out = Path(out_dir) if out_dir is not None else Path(dump).with_name(Path(dump).stem + "-vkit")
    meta = {"design": d.name, "top": d.top, "dump": str(Path(dump).resolve()), "signals": found,
            "seconds": round(time.monotonic() - t0, 3), "simulator": "dump"}
    verdict, files = write_passive_report(f"{d.name}:dump:{Path(dump).name}", board, out, meta)
    return PassiveOutcome(verdict, files, list(board.problems), board.summary())
