"""pytest plugin: every case of a vkit config becomes a pytest item, run through :mod:`vkit.run.runner`.

Enable it in the repo's root ``conftest.py``::

    pytest_plugins = ["vkit.pytest_plugin"]

or on the command line with ``pytest -p vkit.pytest_plugin``. pytest then collects every file named
``vkit.toml`` it visits (or, when the ini option ``vkit_configs`` lists files, exactly those), and each
case of the config's matrix becomes one item ``vkit.toml::<case id>`` marked ``sim`` and ``vkit``
(``-m "not sim"`` leaves them out, ``-k conveyor`` picks cases by id). An item builds the design
(cached), simulates the case, scores it and writes its report like ``vkit run``; a failing item's
message is the scoreboard's first finding and the report path. Cases a config expects to fail (seeded
bugs) are strict xfails. Reports go to ``<out_dir>/pytest`` of the config unless ``--vkit-out`` says
otherwise; ``report.json``, ``junit.xml`` and ``summary.txt`` are written there at the end of the
session (under pytest-xdist too: each worker hands its cases' entries to the controller, which writes them).

Options: ``--vkit-sim NAME`` (repeatable; replaces ``[run] simulators``), ``--vkit-out DIR``; ini
``vkit_configs`` (paths relative to the ini file), ``vkit_simulators``.

cocotb's own pytest plugin (``cocotb_tools._pytest``) runs Python test functions inside the simulator;
vkit cases are data run by vkit's runner in a simulator subprocess, so this plugin does not use it.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest

from vkit.core.errors import VkitError

__all__ = [
    "VkitConfigFile",
    "VkitCaseItem",
    "VkitCaseFailed",
    "VkitCaseError",
    "pytest_addoption",
    "pytest_configure",
    "pytest_collect_file",
    "pytest_sessionfinish",
    "pytest_testnodedown",
]

_ENTRIES = pytest.StashKey[dict[str, list[dict[str, Any]]]]()


class VkitCaseFailed(AssertionError):
    """The design failed a case (wrong pixels, timing, no output)."""


class VkitCaseError(Exception):
    """A case could not be judged (bad stimulus, build failure, simulator crash)."""


def pytest_addoption(parser: pytest.Parser) -> None:
    """``--vkit-sim``, ``--vkit-out`` and the ini options ``vkit_configs``, ``vkit_simulators``."""
    group = parser.getgroup("vkit", "vkit video-filter regression cases")
    group.addoption("--vkit-sim", action="append", default=None, metavar="NAME",
                    help="simulator for vkit cases (repeatable; replaces [run] simulators of the configs)")
    group.addoption("--vkit-out", default=None, metavar="DIR",
                    help="report folder of vkit cases (default: <out_dir>/pytest of each config)")
    parser.addini("vkit_configs", type="paths", default=[],
                  help="vkit config files to collect (default: every vkit.toml pytest visits)")
    parser.addini("vkit_simulators", type="linelist", default=[],
                  help="simulators for vkit cases (replaces [run] simulators of the configs)")


def pytest_configure(config: pytest.Config) -> None:
    """Register the markers and the store of report entries."""
    config.addinivalue_line("markers", "vkit: a case of a vkit config, run through vkit.run.runner")
    config.addinivalue_line("markers", "sim: runs a real HDL simulator")
    config.stash[_ENTRIES] = {}


def pytest_collect_file(file_path: Path, parent: pytest.Collector) -> pytest.Collector | None:
    """A :class:`VkitConfigFile` for ``vkit.toml`` files (or the files listed in ``vkit_configs``)."""
    listed = [Path(p).resolve() for p in parent.config.getini("vkit_configs")]
    if listed:
        if file_path.resolve() not in listed:
            return None
    elif file_path.name != "vkit.toml":
        return None
    return VkitConfigFile.from_parent(parent, path=file_path)


def _simulators(config: pytest.Config) -> list[str] | None:
    names = config.getoption("--vkit-sim") or config.getini("vkit_simulators")
    return list(names) or None


class VkitConfigFile(pytest.File):
    """A vkit config file: one item per case of its matrix."""

    def collect(self):  # type: ignore[no-untyped-def]  # an iterator of VkitCaseItem
        from vkit.run.config import expand_matrix, load_config

        cfg = load_config(self.path)
        out = self.config.getoption("--vkit-out")
        out_dir = Path(out).resolve() if out else cfg.run.out_dir / "pytest"
        for case in expand_matrix(cfg, _simulators(self.config)):
            item = VkitCaseItem.from_parent(self, name=case.id, case=case, run=cfg.run, out_dir=out_dir)
            item.add_marker(pytest.mark.sim)
            item.add_marker(pytest.mark.vkit)
            if case.design.expect == "fail":
                why = case.design.description or case.design.bug or "seeded bug"
                item.add_marker(pytest.mark.xfail(reason=f"expected to fail: {why}", raises=VkitCaseFailed, strict=True))
            yield item

    def repr_failure(self, excinfo: pytest.ExceptionInfo[BaseException], style: Any = None) -> str:  # type: ignore[override]
        """A config problem is one line, not a traceback."""
        if isinstance(excinfo.value, VkitError):
            return f"{self.path}: {excinfo.value}"
        return str(super().repr_failure(excinfo))


class VkitCaseItem(pytest.Item):
    """One case of a vkit config.

    Args:
        case: the :class:`vkit.run.config.Case`.
        run: the config's :class:`vkit.run.config.RunSettings` (timeout, cache, listing limits).
        out_dir: report folder of the case.
    """

    def __init__(self, *, case: Any, run: Any, out_dir: Path, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.case = case
        self.run_settings = run
        self.out_dir = out_dir
        self.result: Any = None

    def runtest(self) -> None:
        """Build (cached), simulate, score and report the case; raise on a failure or an error."""
        from vkit.run.case import run_one_case
        from vkit.run.options import RunOptions
        from vkit.sim.simulators import find

        info = find(self.case.simulator)
        if not info.available:
            pytest.skip(f"{self.case.simulator} is not usable here: {info.reason}")
        s = self.run_settings
        options = RunOptions.make(self.out_dir, cache_dir=s.cache_dir, timeout_s=s.timeout_s,
                                  max_listed=s.max_listed, coverage_floor=s.coverage_floor, drive=s.drive)
        res = run_one_case(self.case, options)
        self.result = res
        self.config.stash[_ENTRIES].setdefault(str(self.out_dir), []).append(res.entry)
        self.user_properties.append(("vkit_status", res.status))
        files = res.entry.get("files", {}) or {}
        report = self.out_dir / files["verdict"] if files.get("verdict") else self.out_dir
        self.user_properties.append(("vkit_report", str(report)))
        if res.status == "pass":
            return
        first = res.diagnosis or res.status
        pictures = [str(self.out_dir / f["composite"]) for f in (files.get("frames") or {}).values() if f.get("composite")]
        where = f"report: {report}" + (f"; picture: {pictures[0]}" if pictures else "")
        if res.status == "error":
            raise VkitCaseError(f"{self.case.id}: could not be judged: {first} ({where})")
        raise VkitCaseFailed(f"{self.case.id}: {res.status}: {first} ({where})")

    def repr_failure(self, excinfo: pytest.ExceptionInfo[BaseException], style: Any = None) -> str:  # type: ignore[override]
        """The case's one-line verdict, not a traceback into vkit."""
        if isinstance(excinfo.value, (VkitCaseFailed, VkitCaseError, VkitError)):
            return str(excinfo.value)
        return str(super().repr_failure(excinfo))

    def reportinfo(self) -> tuple[Path, int | None, str]:
        """Where the case comes from: the config file and the case id."""
        return self.path, None, f"vkit case {self.case.id}"


_WORKER_KEY = "vkit_entries"
"""Key of a pytest-xdist worker's ``workeroutput`` that carries its report entries to the controller."""


@pytest.hookimpl(optionalhook=True)
def pytest_testnodedown(node: Any, error: Any) -> None:
    """pytest-xdist controller: take the report entries of a worker that finished."""
    sent = getattr(node, "workeroutput", {}).get(_WORKER_KEY)
    if not sent:
        return
    mine = node.config.stash.setdefault(_ENTRIES, {})
    for out_dir, cases in json.loads(sent).items():
        mine.setdefault(out_dir, []).extend(cases)


def pytest_sessionfinish(session: pytest.Session, exitstatus: int) -> None:
    """Write report.json, junit.xml and summary.txt for the cases run (under pytest-xdist: each worker sends its
    entries to the controller, which writes the reports)."""
    entries = session.config.stash.get(_ENTRIES, {})
    if hasattr(session.config, "workerinput"):
        session.config.workeroutput[_WORKER_KEY] = json.dumps(entries, default=str)  # type: ignore[attr-defined]
        return
    if not entries:
        return
    from vkit.report.writers import write_run_report

    for out_dir, cases in entries.items():
        write_run_report(cases, out_dir)
