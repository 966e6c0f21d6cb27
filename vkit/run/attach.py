"""The passive scoreboard in a user's own cocotb test: watch a design anywhere in the hierarchy, drive nothing.

Three lines in an existing test::

    import vkit.run.attach as vkit_attach
    board = vkit_attach.attach(dut.u_edge, config="vkit.toml")   # before the stimulus starts
    ...                                                          # the test as it was
    await board.check()                                          # at the end: fails the test on a failing frame

Input frames are rebuilt from what the design receives, run through the model and scored as they
complete, then dropped; the log gets one line per frame and the running summary; :meth:`Board.check`
writes the same report.json, junit.xml, pictures and index.html as a driven run and fails the test with
the verdict's diagnosis.
"""

from __future__ import annotations

import logging
import time
from pathlib import Path
from typing import Any

from vkit.check.passive import FrameScore, PassiveScoreboard
from vkit.core.errors import ConfigError
from vkit.run.config import Config, load_config
from vkit.run.passive import PassiveOutcome, new_scoreboard, pick_design, side_roles, write_passive_report
from vkit.sim.tb.observer import CHUNK_CLOCKS, LevelSampler, find_instance
from vkit.video.observe import Levels

__all__ = ["Board", "PassiveFailure", "attach"]

_LOG = logging.getLogger("vkit.passive")


class PassiveFailure(AssertionError):
    """A frame the passive scoreboard watched failed (an AssertionError, so cocotb reports the test as failed)."""


class Board:
    """A passive scoreboard attached to a running simulation (made by :func:`attach`).

    Attributes:
        scoreboard: the :class:`~vkit.check.passive.PassiveScoreboard` (frames scored, failing, summary).
        outcome: the :class:`~vkit.run.passive.PassiveOutcome` once :meth:`check` ran.
    """

    def __init__(self, sampler_args: dict[str, Any], scoreboard: PassiveScoreboard, *, case_id: str,
                 out_dir: Path, meta: dict[str, Any], fail_fast: bool) -> None:
        self.scoreboard = scoreboard
        self.case_id = case_id
        self.out_dir = out_dir
        self.fail_fast = fail_fast
        self.outcome: PassiveOutcome | None = None
        self._meta = meta
        self._t0 = time.monotonic()
        self._sampler = LevelSampler(on_chunk=self._on_chunk, **sampler_args)
        self._sampler.start()

    def _on_chunk(self, chunk: dict[str, Levels]) -> None:
        for fs in self.scoreboard.feed(chunk["in"], chunk["out"]):
            self._log(fs)
            if self.fail_fast and not fs.passed:
                self._sampler.stop()
                self._finish()

    def _log(self, fs: FrameScore) -> None:
        h, w = fs.shape
        d = fs.verdict.diagnosis
        what = "pass" if fs.passed else f"FAIL ({d.kind}: {d.message})" if d else "FAIL"
        _LOG.info("vkit passive: frame %d (%dx%d) %s; %s", fs.index, w, h, what, self.scoreboard.summary())

    def _finish(self) -> PassiveOutcome:
        board = self.scoreboard
        for fs in board.finish():
            self._log(fs)
        for line in board.problems:
            _LOG.warning("vkit passive: %s", line)
        if board.frames_scored == 0:
            raise ConfigError(f"vkit passive: nothing to score: {'; '.join(board.problems)}")
        meta = {**self._meta, "clocks_watched": self._sampler.clocks, "seconds": round(time.monotonic() - self._t0, 3)}
        verdict, files = write_passive_report(self.case_id, board, self.out_dir, meta)
        self.outcome = PassiveOutcome(verdict, files, list(board.problems), board.summary())
        _LOG.info("vkit passive: %s; report %s", board.summary(), files["index"])
        if not verdict.passed:
            d = verdict.diagnosis
            raise PassiveFailure(f"vkit passive: {verdict.status}: {d.kind + ': ' + d.message if d else ''} "
                                 f"({board.frames_scored} frame(s) scored, {board.frames_failing} failing); "
                                 f"page: {files['index']}")
        return self.outcome

    async def check(self) -> PassiveOutcome:
        """Stop watching, score what is complete, write the reports; raise :class:`PassiveFailure` when a frame
        failed (a frame the run ended in the middle of is named in the log, not scored)."""
        if self.outcome is not None:
            return self.outcome
        self._sampler.stop()
        return self._finish()


def attach(instance: Any, config: str | Path | Config, *, design: str | None = None, out_dir: str | Path | None = None,
           fail_fast: bool = False, chunk_clocks: int = CHUNK_CLOCKS, timing: str | None = None) -> Board:
    """Watch a design's input and output inside a running cocotb test and score every frame; nothing is driven.

    Args:
        instance: the cocotb handle of the design (``dut.u_isp.u_edge``), or a handle above it when the
            config's ``instance`` key gives the path from there.
        config: the vkit config (path or loaded) naming the design's ports, spec and pixel format.
        design: the design's name in the config (default: its only design).
        out_dir: report folder (default: ``vkit-passive`` in the simulator's working folder).
        fail_fast: fail the test at the first failing frame (default: at :meth:`Board.check`).
        chunk_clocks: clocks sampled between two scoring steps.
        timing: a timing preset the run should follow (frame sizes and hsync pulses a vsync period are checked
            against it), or None.

    Returns:
        The :class:`Board`; ``await board.check()`` at the end of the test.
    """
    cfg = config if isinstance(config, Config) else load_config(config)
    d = pick_design(cfg, design)
    _LOG.setLevel(logging.INFO)  # the per-frame lines and the running summary reach the simulator's log
    handle = instance
    if d.instance and _has_child(instance, d.instance.split(".")[0]):  # a handle above the design
        handle = find_instance(instance, d.instance)
    sides = side_roles(d)
    sampler_args = dict(instance=handle, signals=dict(d.ports), family=d.family,  # the whole map, checked as a driver's
                        sides={side: tuple(sides[side]) for side in ("in", "out")},
                        reset_active_high=d.reset_active_high, chunk_clocks=chunk_clocks)
    path = getattr(handle, "_path", getattr(handle, "_name", "?"))
    out = Path(out_dir) if out_dir is not None else Path.cwd() / "vkit-passive"
    meta = {"design": d.name, "top": d.top, "instance": path, "simulator": _simulator()}
    board = new_scoreboard(d, out_data_bits=_width(handle, d.ports["out_data"]), timing=timing)
    return Board(sampler_args, board, case_id=f"{d.name}:passive:{path}", out_dir=out.resolve(),
                 meta=meta, fail_fast=fail_fast)


def _width(handle: Any, port: str) -> int | None:
    """Bits of port ``port`` of ``handle`` (None when the simulator does not say)."""
    try:
        return int(len(handle._get(port) if hasattr(handle, "_get") else getattr(handle, port)))
    except Exception:  # a handle without a length: the word is then taken as one pixel
        return None


def _has_child(handle: Any, name: str) -> bool:
    try:
        return (handle._get(name) if hasattr(handle, "_get") else getattr(handle, name, None)) is not None
    except Exception:  # a simulator that raises on an unknown name
        return False


def _simulator() -> str | None:
    try:
        import cocotb

        return str(cocotb.SIM_NAME).lower()
    except Exception:  # outside a simulator
        return None
