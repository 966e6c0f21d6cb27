"""One static HTML page per run (``index.html``) and per model quality report, built with Jinja2.

The pages are self-contained: styles, the table's sorting and filtering script and the thumbnails travel
inside the file; full-size pictures, waves and ``verdict.json`` are linked relative to the page, so the
page works from a file URL and from an unpacked CI artifact. The table's view follows the URL fragment,
so it can be linked: ``index.html#status=fail&q=edge_core&sort=-mismatches`` (``status`` is ``pass``,
``fail``, ``no_output``, ``error`` or ``failing`` = anything but a pass; ``q`` is text the row must
contain; ``sort`` is a column key: design, simulator, stimulus, timing, path, status, mismatches,
diagnosis, time, with ``-`` for descending).
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

from vkit.core.errors import ConfigError
from vkit.report.figures import (
    BarChart, Picture, RangeBar, bar_chart, first_frame_picture, mismatches_per_line, picture, range_bars,
)
from vkit.report.writers import safe_name

__all__ = ["CaseView", "load_cases", "render_index", "write_index", "render_model_page", "write_model_page"]

INDEX_NAME = "index.html"
"""File name of the page, in the run's (or the model report's) folder."""

FAIL_PICTURE_WIDTH = 1100
"""Largest width of a failing case's embedded composite picture, pixels: the composite of a frame up to
64 pixels wide (four 256-pixel panels, 1044 pixels) stays at full size so its labels stay legible;
wider ones are downscaled and the full file is linked."""
PASS_PICTURE_WIDTH = 240
"""Largest width of a passing case's thumbnail, pixels."""
EMBED_BUDGET_BYTES = 12_000_000
"""Embedded pictures stop here and later ones are linked instead, so a page of any size stays under
20 MB (12 MB of base64 pictures leave room for the table and the figures of thousands of cases)."""
FIRST_MISMATCHES_SHOWN = 8
"""First mismatches listed per failing case (report.json keeps up to [run] max_listed)."""
OPEN_FAILURES = 3
"""Failing cases whose card is open when the page loads (the rest are one click away)."""

_FRAME_FILES = ("composite", "input", "expected", "actual", "diff")
_CASE_LINKS = (("verdict", "verdict.json"), ("waves", "waves"), ("sim_log", "simulator log"),
               ("case_json", "case.json"), ("frames_npy", "input frames (.npy)"), ("capture", "capture (.npz)"))


@dataclass
class CaseView:
    """What the page shows of one case, read once from report.json and the case's verdict.json.

    ``meta`` facts (design, stimulus, timing, drive path, time, rerun command) live in verdict.json;
    a case without one (a build error) shows them as unknown.
    """

    id: str
    anchor: str
    status: str
    simulator: str
    design: str
    stimulus: str
    timing: str
    path: str
    seconds: float | None
    expect: str
    expect_kind: str | None
    mismatches: int
    pixels_checked: int
    max_abs_error: int
    latency_clocks: int | None
    diagnosis_kind: str | None
    diagnosis: str | None
    findings: list[dict[str, Any]]
    bug: str | None
    bug_description: str | None
    rerun: str | None
    timing_errors: list[str]
    first_mismatches: list[dict[str, Any]]
    coverage: list[RangeBar]
    coverage_warnings: list[str]
    clamp_shares: dict[str, float]
    links: list[tuple[str, str]]
    frame_links: list[tuple[str, list[tuple[str, str]]]]
    per_frame: BarChart | None = None
    per_line: BarChart | None = None
    picture: Picture | None = None
    picture_note: str = ""
    traceback: str | None = None
    warnings: list[str] = field(default_factory=list)

    @property
    def passed(self) -> bool:
        """True when the design passed this case."""
        return self.status == "pass"

    @property
    def as_expected(self) -> bool:
        """True when the case came out as the config expected (a seeded bug that failed, a pass)."""
        return (self.status == "pass") == (self.expect != "fail") and self.status != "error"

    @property
    def stage_names(self) -> list[str]:
        """Stage names of the first mismatches, in pipeline order."""
        names: list[str] = []
        for m in self.first_mismatches:
            names += [n for n in (m.get("stages") or {}) if n not in names]
        return names


def _read_json(path: Path) -> dict[str, Any] | None:
    try:
        body = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return body if isinstance(body, dict) else None


def _meta(out: Path, case: Mapping[str, Any]) -> dict[str, Any]:
    """The case's meta facts: from report.json if it carries them, else from the case's verdict.json."""
    if isinstance(case.get("meta"), dict) and case["meta"]:
        return dict(case["meta"])
    rel = (case.get("files") or {}).get("verdict")
    body = _read_json(out / rel) if isinstance(rel, str) else None
    return dict((body or {}).get("meta") or {})


def _links(files: Mapping[str, Any]) -> list[tuple[str, str]]:
    return [(label, files[key]) for key, label in _CASE_LINKS if isinstance(files.get(key), str)]


def _frame_key(index: Any) -> int:
    return int(index) if str(index).isdigit() else 0


def _frame_links(files: Mapping[str, Any]) -> list[tuple[str, list[tuple[str, str]]]]:
    frames = files.get("frames") or {}
    out = []
    for index in sorted(frames, key=_frame_key):
        entry = frames[index] or {}
        out.append((str(index), [(name, entry[name]) for name in _FRAME_FILES if isinstance(entry.get(name), str)]))
    return out


def _text(value: Any) -> str:
    return "-" if value in (None, "") else str(value)


def _case_view(out: Path, case: Mapping[str, Any]) -> CaseView:
    v = case.get("verdict") or {}
    counts = case.get("counts") or {}
    meta = _meta(out, case)
    files = case.get("files") or {}
    cov = case.get("coverage") or {}
    diag = case.get("diagnosis") or v.get("diagnosis")
    seconds = meta.get("seconds")
    return CaseView(
        id=str(case["id"]), anchor="case-" + safe_name(str(case["id"])),
        status=str(case.get("status") or v.get("status") or "error"),
        simulator=_text(case.get("simulator")), design=_text(meta.get("design")),
        stimulus=_text(meta.get("stimulus")), timing=_text(meta.get("timing")), path=_text(meta.get("path")),
        seconds=float(seconds) if isinstance(seconds, (int, float)) else None,
        expect=str(meta.get("expect") or "pass"), expect_kind=meta.get("expect_kind"),
        mismatches=int(counts.get("mismatches", v.get("mismatches", 0)) or 0),
        pixels_checked=int(counts.get("pixels_checked", v.get("pixels_checked", 0)) or 0),
        max_abs_error=int(counts.get("max_abs_error", v.get("max_abs_error", 0)) or 0),
        latency_clocks=case.get("latency_clocks", v.get("latency_clocks")),
        diagnosis_kind=diag.get("kind") if diag else None, diagnosis=diag.get("message") if diag else None,
        findings=list(v.get("findings") or []), bug=meta.get("bug"), bug_description=meta.get("description"),
        rerun=meta.get("rerun"), timing_errors=[str(t) for t in v.get("timing_errors") or []],
        first_mismatches=list(v.get("first_mismatches") or [])[:FIRST_MISMATCHES_SHOWN],
        coverage=range_bars(cov.get("stages") or [], cov.get("floor")),
        coverage_warnings=[str(w) for w in cov.get("warnings") or []],
        clamp_shares={str(k): float(x) for k, x in (cov.get("clamp_shares") or {}).items()},
        links=_links(files), frame_links=_frame_links(files), traceback=meta.get("traceback"),
    )


def _shown_frame(case: Mapping[str, Any]) -> tuple[str, Mapping[str, Any]] | None:
    """The frame whose picture the page shows: the first failing one, else the first one written."""
    frames = (case.get("files") or {}).get("frames") or {}
    order = sorted(frames, key=_frame_key)
    if not order:
        return None
    failing = {str(p.get("frame")) for p in (case.get("verdict") or {}).get("per_frame") or [] if p.get("mismatches")}
    pick = next((k for k in order if str(k) in failing), order[0])
    return str(pick), frames[pick] or {}


def _lines_of(out: Path, per_frame: list[dict[str, Any]], index: str, files: Mapping[str, Any]) -> list[int] | None:
    """Failing pixels per line of frame ``index``: from the verdict when it lists them
    (``per_frame[].mismatches_per_line``), else counted from the frame's diff picture."""
    for p in per_frame:
        if str(p.get("frame")) == index and isinstance(p.get("mismatches_per_line"), list):
            return [int(n) for n in p["mismatches_per_line"]]
    return mismatches_per_line(out / files["diff"]) if isinstance(files.get("diff"), str) else None


def _add_figures(view: CaseView, out: Path, case: Mapping[str, Any], budget: list[int]) -> None:
    """Charts and the picture of one case; ``budget`` holds the embedded bytes still allowed."""
    per_frame = (case.get("verdict") or {}).get("per_frame") or []
    if not view.passed and per_frame:
        view.per_frame = bar_chart("failing pixels per frame", "frame",
                                   [(p.get("frame"), int(p.get("mismatches", 0))) for p in per_frame])
    case_files = case.get("files") or {}
    index, files = _shown_frame(case) or ("", {})
    if not view.passed:
        lines = _lines_of(out, per_frame, index, files)
        if lines is not None:
            view.per_line = bar_chart(f"failing pixels per line, frame {index}", "line", list(enumerate(lines)))
    keys = ("actual", "composite", "input") if view.passed else ("composite", "input")
    shown = next((files[k] for k in keys if isinstance(files.get(k), str)), None)
    width = PASS_PICTURE_WIDTH if view.passed else FAIL_PICTURE_WIDTH
    if shown is not None:
        view.picture = picture(out / shown, out, width, embed=budget[0] > 0)
        view.picture_note = f"frame {index}: " + ("the design's output" if shown == files.get("actual") else
                                                  "input, expected, actual, difference" if shown == files.get("composite")
                                                  else "input")
    elif view.passed and budget[0] > 0 and isinstance(case_files.get("frames_npy"), str):
        view.picture = first_frame_picture(out / case_files["frames_npy"], out, width)
        view.picture_note = "frame 0: input (no pictures kept for passing cases)"
    if view.picture is not None and view.picture.embedded:
        budget[0] -= len(view.picture.src)


def load_cases(out_dir: str | Path) -> tuple[dict[str, Any], list[CaseView]]:
    """Read a run's ``report.json`` and the case folders: ``(totals, one CaseView per case)``.

    Raises:
        ConfigError: ``out_dir`` holds no readable report.json.
    """
    out = Path(out_dir)
    report = _read_json(out / "report.json")
    if report is None or not isinstance(report.get("cases"), list):
        raise ConfigError(f"index: {out / 'report.json'} is missing or unreadable; "
                          "pass the report folder a run or `vkit merge` wrote")
    budget = [EMBED_BUDGET_BYTES]
    views = []
    for case in report["cases"]:
        view = _case_view(out, case)
        _add_figures(view, out, case, budget)
        views.append(view)
    return dict(report.get("totals") or {}), views


def _summary(totals: Mapping[str, Any], views: list[CaseView]) -> dict[str, Any]:
    expected_fail = [v for v in views if v.expect == "fail"]
    times = [v.seconds for v in views if v.seconds is not None]
    return {
        "cases": totals.get("cases", len(views)), "passed": totals.get("passed", 0),
        "failed": totals.get("failed", 0), "errors": totals.get("errors", 0),
        "expected_fail": len(expected_fail),
        "expected_fail_failed": sum(v.status in ("fail", "no_output") for v in expected_fail),
        "expected_kind": sum(v.diagnosis_kind == v.expect_kind for v in expected_fail if v.expect_kind),
        "unexpected": sum(not v.as_expected for v in views),
        "case_seconds": sum(times) if times else None,
        "simulators": sorted({v.simulator for v in views if v.simulator != "-"}),
    }


def _environment() -> Any:
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.PackageLoader("vkit.report", "templates"),
        autoescape=True, trim_blocks=True, lstrip_blocks=True, undefined=jinja2.StrictUndefined,
        # compiled templates kept in the user's temp folder: compiling the page takes about 0.1 s a run
        bytecode_cache=jinja2.FileSystemBytecodeCache(),
    )
    env.filters["seconds"] = _format_seconds
    env.filters["share"] = lambda x: f"{100.0 * float(x):.1f}%"
    env.filters["number"] = lambda x: f"{int(x):,}"
    return env


def _format_seconds(value: float | None) -> str:
    if value is None or not math.isfinite(value):
        return "-"
    if value < 60:
        return f"{value:.1f} s"
    minutes, secs = divmod(int(round(value)), 60)
    return f"{minutes // 60}:{minutes % 60:02d}:{secs:02d}" if minutes >= 60 else f"{minutes}:{secs:02d}"


def render_index(out_dir: str | Path, title: str | None = None) -> str:
    """The run page of ``out_dir`` as HTML text (see :func:`write_index`)."""
    out = Path(out_dir)
    totals, views = load_cases(out)
    failing = [v for v in views if not v.passed]
    failing.sort(key=lambda v: (v.as_expected, v.status == "error"))  # surprises first, then failures, errors
    return _environment().get_template("index.html.j2").render(
        title=title or f"vkit run: {out.resolve().name}", summary=_summary(totals, views), cases=views,
        failing=failing, passing=[v for v in views if v.passed], open_failures=OPEN_FAILURES,
        statuses=sorted({v.status for v in views}),
    )


def write_index(out_dir: str | Path, title: str | None = None) -> Path:
    """Write ``index.html`` into a run's report folder, from its report.json and case folders.

    Call it after :func:`vkit.report.writers.write_run_report` (a run) or
    :func:`~vkit.report.writers.merge_reports` with ``out_dir`` (a merge of shards).

    Args:
        out_dir: the report folder (holds report.json).
        title: page title; default ``vkit run: <folder name>``.

    Returns:
        The path of ``index.html``.

    Raises:
        ConfigError: no readable report.json in ``out_dir``.
    """
    path = Path(out_dir) / INDEX_NAME
    path.write_text(render_index(out_dir, title), encoding="utf-8")
    return path


# --------------------------------------------------------------------------- model quality page

MODEL_PICTURE_WIDTH = 480
"""Largest width of the model page's embedded output and error pictures, pixels."""
_MAX_HISTOGRAM_BINS = 256
"""Error histograms wider than this many 1-LSB bins are drawn with the observed bins only."""


def _histogram(pairs: list[list[int]], title: str) -> BarChart:
    """The error histogram as a bar chart with one bar per LSB from the lowest to the highest error."""
    counts = {int(k): int(v) for k, v in pairs}
    keys = sorted(counts)
    if keys and keys[-1] - keys[0] < _MAX_HISTOGRAM_BINS:
        keys = list(range(keys[0], keys[-1] + 1))
    return bar_chart(title, "fixed point minus float, LSB", [(f"{k:+d}" if k else "0", counts.get(k, 0)) for k in keys])


def _model_images(out: Path, images: list[dict[str, Any]]) -> list[dict[str, Any]]:
    shown = []
    for q in images:
        label = str(q.get("label"))
        shown.append({
            "quality": q,
            "histogram": _histogram(q.get("error_histogram") or [], f"{label}: error histogram"),
            "output": picture(out / f"{label}_output.png", out, MODEL_PICTURE_WIDTH),
            "error": picture(out / f"{label}_error.png", out, MODEL_PICTURE_WIDTH),
        })
    return shown


def render_model_page(out_dir: str | Path, title: str | None = None) -> str:
    """The quality page of a model report folder as HTML text (see :func:`write_model_page`)."""
    out = Path(out_dir)
    data = _read_json(out / "report.json")
    if data is None or not isinstance(data.get("quality"), dict):
        raise ConfigError(f"model page: {out / 'report.json'} is missing or is not a model report; "
                          "pass the folder `vkit model` (vkit.model.quality.write_model_report) wrote")
    quality = data["quality"]
    overall = quality.get("overall") or {}
    spec = data.get("spec") or {}
    return _environment().get_template("model.html.j2").render(
        title=title or f"vkit model: {quality.get('pipeline', spec.get('name', '?'))}",
        quality=quality, overall=overall, spec=spec, widths=data.get("widths") or [],
        histogram=_histogram(overall.get("error_histogram") or [], "error histogram, all images"),
        coverage=range_bars(overall.get("coverage") or []),
        images=_model_images(out, list(quality.get("images") or [])),
        peak=(1 << int(quality.get("output_bits", 8))) - 1,
    )


def write_model_page(out_dir: str | Path, title: str | None = None) -> Path:
    """Write ``index.html`` into a model report folder: how far the bit-exact model is from its float twin.

    Call it after :func:`vkit.model.quality.write_model_report` with the same folder. The page shows the
    pooled error figures (max and mean ``|fixed - float|`` in output LSBs, PSNR), the error histogram,
    per-stage range coverage against each stage's theoretical range, clamp shares, the stage width
    table, the spec, and per image its output and error pictures with their own histogram.

    Args:
        out_dir: the model report folder (holds report.json and the ``<label>_output.png`` /
            ``<label>_error.png`` pictures).
        title: page title; default ``vkit model: <pipeline>``.

    Returns:
        The path of ``index.html``.

    Raises:
        ConfigError: no readable model report.json in ``out_dir``.
    """
    path = Path(out_dir) / INDEX_NAME
    path.write_text(render_model_page(out_dir, title), encoding="utf-8")
    return path
