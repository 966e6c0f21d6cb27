"""Reports: per-frame PNGs of failing cases, report.json, JUnit XML and a summary table, plus shard merging."""

from __future__ import annotations

import hashlib
import io
import json
import math
import os
import re
import xml.etree.ElementTree as ET
from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np
from PIL import Image, ImageDraw, ImageFont

from vkit.video.capture import UNKNOWN, Capture
from vkit.core.errors import ConfigError
from vkit.report.schema import check_report

__all__ = [
    "MISSING_COLOUR",
    "XZ_COLOUR",
    "UNCHECKED_COLOUR",
    "safe_name",
    "case_folder",
    "case_entry",
    "write_case_report",
    "write_run_report",
    "format_summary",
    "merge_reports",
]

MISSING_COLOUR = (0, 255, 255)
"""Cyan: a checked pixel that never arrived."""
XZ_COLOUR = (255, 0, 255)
"""Magenta: a pixel that arrived as X/Z."""
UNCHECKED_COLOUR = (0, 0, 96)
"""Dark blue: a pixel the model leaves unchecked (border policy ``unchecked``)."""

_MIN_PANEL_WIDTH = 256
"""Small frames are enlarged (nearest neighbour) until a panel is at least this wide, pixels."""
_MAX_SCALE = 16
_LABEL_HEIGHT = 14
_GAP = 4


def safe_name(case_id: str) -> str:
    """A file-name-safe form of a case id: ``[A-Za-z0-9._-]`` only, no leading dot, at most 80 chars.

    When characters had to be replaced, a short hash of the original id is appended so two ids that
    differ only in replaced characters never share a name.
    """
    text = str(case_id)
    clean = re.sub(r"[^A-Za-z0-9._-]+", "_", text)
    clean = re.sub(r"\.{2,}", "_", clean).strip("._")[:80] or "case"
    if clean != text:
        clean = f"{clean}-{hashlib.sha1(text.encode('utf-8')).hexdigest()[:8]}"
    return clean


def case_folder(out_dir: str | Path, case_id: str, *parts: str) -> Path:
    """``out_dir/<safe case id>/<parts>``, resolved; every file of a case goes below it.

    Raises:
        ConfigError: the folder would fall outside ``out_dir`` (a case id or part that climbs out).
    """
    root = Path(out_dir).resolve()
    path = Path(out_dir, safe_name(case_id), *parts)
    full = path.resolve()
    if full != root and root not in full.parents:
        raise ConfigError(f"report path {path} falls outside the report folder {out_dir}; use a plain case id")
    return full


def _rel(out_dir: Path, path: Path) -> str:
    return Path(os.path.relpath(path.resolve(), out_dir.resolve())).as_posix()


# --------------------------------------------------------------------------- images


def _grey(values: np.ndarray, ok: np.ndarray, top: int) -> np.ndarray:
    """Values 0..top as an RGB uint8 image (pixels not ``ok`` are left black)."""
    scaled = np.clip(values.astype(np.float64) * (255.0 / max(1, top)), 0, 255).astype(np.uint8)
    scaled = np.where(ok, scaled, 0).astype(np.uint8)
    return np.repeat(scaled[:, :, None], 3, axis=2)


def _hot(err: np.ndarray, top: int) -> np.ndarray:
    """Absolute error to RGB: black at 0, then red, yellow, white at ``top``."""
    t = np.clip(err.astype(np.float64) / max(1, top), 0, 1)
    t = np.where(err > 0, 0.25 + 0.75 * t, 0.0)  # the smallest error is still clearly red
    r = np.clip(t * 3, 0, 1)
    g = np.clip(t * 3 - 1, 0, 1)
    b = np.clip(t * 3 - 2, 0, 1)
    return (np.stack([r, g, b], axis=2) * 255).astype(np.uint8)


def _frame_images(fr: Any, top: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    exp_ok = np.ones(fr.expected.shape, bool)
    expected = _grey(fr.expected, exp_ok, top)
    expected[~fr.valid] = (expected[~fr.valid] // 2) + np.array(UNCHECKED_COLOUR, np.uint8) // 2
    known = fr.present & (fr.actual != UNKNOWN)
    actual = _grey(fr.actual, known, top)
    actual[fr.present & (fr.actual == UNKNOWN)] = XZ_COLOUR
    actual[~fr.present] = MISSING_COLOUR
    err = np.abs(fr.error) * fr.value_bad
    emax = int(err.max()) if err.size else 0
    diff = _hot(err, emax)
    diff[~fr.valid] = UNCHECKED_COLOUR
    diff[fr.unknown] = XZ_COLOUR
    diff[fr.missing] = MISSING_COLOUR
    return expected, actual, diff, emax


def _input_image(fr: Any) -> np.ndarray | None:
    """The frame the design was fed, as 8-bit RGB, when the model kept its input stage."""
    st = (getattr(fr.model, "stages", {}) or {}).get("input")
    arr = getattr(st, "array", None)
    if arr is None or arr.shape[:2] != fr.expected.shape:
        return None
    arr = np.asarray(arr)
    if arr.ndim == 3 and arr.shape[2] != 3:  # Y'CbCr 4:2:2: the picture is its Y'
        arr = arr[..., 0]
    if arr.dtype != np.uint8:  # wider samples: their top 8 bits
        arr = arr >> max(0, int(arr.max(initial=0)).bit_length() - 8)
    arr = arr.astype(np.uint8)
    return np.ascontiguousarray(np.repeat(arr[..., None], 3, axis=2) if arr.ndim == 2 else arr)


def _scale_for(width: int) -> int:
    return max(1, min(_MAX_SCALE, math.ceil(_MIN_PANEL_WIDTH / max(1, width))))


def _composite(panels: Sequence[tuple[str, np.ndarray]], footer: str) -> Image.Image:
    h, w = panels[0][1].shape[:2]
    s = _scale_for(w)
    pw, ph = w * s, h * s
    font = ImageFont.load_default()
    total_w = len(panels) * pw + (len(panels) + 1) * _GAP
    total_h = _LABEL_HEIGHT + ph + _LABEL_HEIGHT + 2 * _GAP
    canvas = Image.new("RGB", (total_w, total_h), (48, 48, 48))
    draw = ImageDraw.Draw(canvas)
    for k, (label, arr) in enumerate(panels):
        x = _GAP + k * (pw + _GAP)
        draw.text((x, 1), label, fill=(255, 255, 255), font=font)
        img = Image.fromarray(arr, "RGB").resize((pw, ph), Image.NEAREST)
        canvas.paste(img, (x, _LABEL_HEIGHT + _GAP))
    draw.text((_GAP, _LABEL_HEIGHT + ph + _GAP + 1), footer, fill=(220, 220, 220), font=font)
    return canvas


def _rebuild_frames(verdict: Any, expected: Sequence[Any], capture: Capture) -> list[Any]:
    frames = list(getattr(verdict, "frames", []) or [])
    if frames and all(getattr(fr, "arrays_kept", True) for fr in frames if fr is not None):
        return frames
    # A verdict without arrays (read back from JSON, or passing frames that kept their counts only): score again.
    from vkit.check.scoreboard import score

    return score(expected, capture, tolerance_lsb=int(getattr(verdict, "tolerance_lsb", 0))).frames


def _save_png(arr: np.ndarray, path: Path, out: Path) -> str:
    Image.fromarray(arr, "RGB").save(path)
    return _rel(out, path)


def _frame_pictures(fr: Any, case_dir: Path, out: Path) -> dict[str, str]:
    """Write one frame's expected, actual, diff, input (when kept) and composite PNGs; their report paths."""
    e_img, a_img, d_img, emax = _frame_images(fr, _display_top(fr))
    stem = case_dir / f"frame{fr.index:03d}"
    files = {name: _save_png(arr, Path(f"{stem}_{name}.png"), out)
             for name, arr in (("expected", e_img), ("actual", a_img), ("diff", d_img))}
    panels = [("expected", e_img), ("actual", a_img), (f"|diff| max {emax}", d_img)]
    stimulus = _input_image(fr)
    if stimulus is not None:  # what the design was fed, first, so a defect can be traced to it
        files["input"] = _save_png(stimulus, Path(f"{stem}_input.png"), out)
        panels.insert(0, ("input", stimulus))
    footer = f"frame {fr.index}: {int(fr.mismatch.sum())} failing px, max |err| {emax}; cyan=missing magenta=X/Z"
    composite = Path(f"{stem}_composite.png")
    _composite(panels, footer).save(composite)
    files["composite"] = _rel(out, composite)
    return files


def write_case_report(
    case_id: str,
    verdict: Any,
    expected: Sequence[Any],
    capture: Capture,
    out_dir: str | Path,
    meta: Mapping[str, Any] | None = None,
    pictures: str = "failing",
) -> dict[str, Any]:
    """Write the pictures and the verdict of one case under ``out_dir/<safe case id>/``.

    For each failing frame (every frame with ``pictures="all"``): ``frameNNN_expected.png``, ``frameNNN_actual.png``, ``frameNNN_diff.png``
    (absolute error, black = equal, red to white up to the largest error, cyan = missing, magenta =
    X/Z, dark blue = unchecked), ``frameNNN_input.png`` (the frame the design was fed, when the model
    kept it) and ``frameNNN_composite.png`` (input | expected | actual | diff, labelled, enlarged so a
    panel is at least 256 pixels wide). Also ``verdict.json`` (verdict plus ``meta``).

    Args:
        case_id: the case's id (any text; sanitised for file names).
        verdict: the case's :class:`~vkit.check.scoreboard.Verdict`.
        expected: the ModelResults the verdict was scored against.
        capture: the capture the verdict was scored from.
        out_dir: the run's report folder.
        meta: extra facts stored in ``verdict.json`` (seeds, simulator, ...).
        pictures: ``"failing"`` or ``"all"``.

    Returns:
        ``{"verdict": path, "frames": {"<index>": {"expected", "actual", "diff", "composite"}}}`` with
        paths relative to ``out_dir`` (POSIX separators).
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    case_dir = case_folder(out, case_id)
    case_dir.mkdir(parents=True, exist_ok=True)
    paths: dict[str, Any] = {"frames": {}}
    status = getattr(verdict, "status", "")
    # timeout / error: a simulation stopped at its time limit or by a signal, scored up to where it stopped
    failing = not getattr(verdict, "passed", False) and status in ("fail", "no_output", "timeout", "error")
    if failing or (pictures == "all" and status != "error"):
        frames = list(_rebuild_frames(verdict, expected, capture))
        # a case that failed on its framing only (every checked pixel right) still shows its frames
        shown = [fr for fr in frames if fr.failed or pictures == "all"] or (frames if failing else [])
        for fr in shown:
            paths["frames"][str(fr.index)] = _frame_pictures(fr, case_dir, out)
    vpath = case_dir / "verdict.json"
    body = {"id": str(case_id), "verdict": verdict.to_dict(), "meta": dict(meta or {})}
    vpath.write_text(json.dumps(body, indent=2, default=_json_default))
    paths["verdict"] = _rel(out, vpath)
    return paths


def _display_top(fr: Any) -> int:
    """Value shown as white: the output stage's top of range, or the largest value seen."""
    st = (getattr(fr.model, "stages", {}) or {}).get("output")
    hi = getattr(st, "hi", None)
    seen = [int(hi)] if hi is not None else []
    if fr.expected.size:
        seen.append(int(fr.expected.max()))
    known = fr.present & (fr.actual != UNKNOWN)
    if known.any():
        seen.append(int(fr.actual[known].max()))
    return max(1, *seen)


def _json_default(obj: Any) -> Any:
    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, Path):
        return obj.as_posix()
    raise TypeError(f"{type(obj).__name__} is not JSON-serialisable")


# --------------------------------------------------------------------------- run report


def case_entry(
    case_id: str,
    verdict: Any,
    *,
    simulator: str | None = None,
    seeds: Mapping[str, Any] | None = None,
    files: Mapping[str, Any] | None = None,
    coverage: Mapping[str, Any] | None = None,
    meta: Mapping[str, Any] | None = None,
    drive: str | None = None,
) -> dict[str, Any]:
    """One case for :func:`write_run_report`, in the shape report.json stores.

    Args:
        case_id: the case's id.
        verdict: a :class:`~vkit.check.scoreboard.Verdict` or its ``to_dict()``.
        simulator: simulator name.
        seeds: seeds that reproduce the case (name -> value).
        files: paths from :func:`write_case_report` (relative to the run's report folder).
        coverage: coverage figures, if collected.
        meta: anything else worth keeping.
        drive: the drive path the case ran on (``"clock"``, ``"fast"`` or ``"native"``), None when none ran.
    """
    v = verdict.to_dict() if hasattr(verdict, "to_dict") else dict(verdict)
    return {
        "id": str(case_id),
        "simulator": simulator,
        "drive": drive,
        "verdict": v,
        "seeds": dict(seeds or {}),
        "files": dict(files or {}),
        "coverage": dict(coverage) if coverage is not None else None,
        "meta": dict(meta or {}),
    }


def _norm(case: Mapping[str, Any]) -> dict[str, Any]:
    if "id" not in case or "verdict" not in case:
        raise ConfigError(
            f"report case {dict(case).get('id', '?')!r} lacks 'id' or 'verdict'; build it with vkit.report.writers.case_entry"
        )
    c = dict(case)
    v = c["verdict"]
    c["verdict"] = v.to_dict() if hasattr(v, "to_dict") else dict(v)
    c.setdefault("simulator", None)
    c.setdefault("drive", (c.get("meta") or {}).get("path"))  # entries written before the field kept it in meta
    c.setdefault("seeds", {})
    c.setdefault("files", {})
    c.setdefault("coverage", None)
    return c


def _diagnosis(v: Mapping[str, Any]) -> dict[str, Any] | None:
    d = v.get("diagnosis")
    if d is None and v.get("findings"):
        d = v["findings"][0]
    return d



def _latency_pixels(latency_clocks: int | None, meta: dict[str, Any]) -> int | None:
    """The latency counted in pixels: clocks times the pixels a clock of the design's bus (one unless told)."""
    if latency_clocks is None:
        return None
    return int(latency_clocks) * int((meta.get("bus") or {}).get("pixels_per_clock", 1))


def _report_case(c: Mapping[str, Any]) -> dict[str, Any]:
    v = c["verdict"]
    row = {
        "id": c["id"],
        "simulator": c.get("simulator"),
        "drive": c.get("drive"),
        "status": v.get("status"),
        "passed": bool(v.get("passed")),
        "counts": {
            "frames_checked": v.get("frames_checked", 0),
            "pixels_checked": v.get("pixels_checked", 0),
            "mismatches": v.get("mismatches", 0),
            "xz_pixels": v.get("xz_pixels", 0),
            "missing_pixels": v.get("missing_pixels", 0),
            "max_abs_error": v.get("max_abs_error", 0),
        },
        "latency_clocks": v.get("latency_clocks"),
        "latency_pixels": _latency_pixels(v.get("latency_clocks"), c.get("meta", {})),
        "diagnosis": _diagnosis(v),
        "seeds": c.get("seeds", {}),
        "files": c.get("files", {}),
        "coverage": c.get("coverage"),
        "meta": c.get("meta", {}),
        "verdict": v,
    }
    if c.get("diagnosis_by_mutant") is not None:
        row["diagnosis_by_mutant"] = c["diagnosis_by_mutant"]
    return row


def _totals(cases: Sequence[Mapping[str, Any]]) -> dict[str, int]:
    t = {"cases": len(cases), "passed": 0, "failed": 0, "errors": 0}
    for c in cases:
        st = c["verdict"].get("status")
        if st == "pass":
            t["passed"] += 1
        elif st == "error":
            t["errors"] += 1
        else:
            t["failed"] += 1
    return t


def format_summary(cases: Sequence[Mapping[str, Any]]) -> str:
    """An aligned text table: case, simulator, drive path, verdict, mismatches, diagnosis (one row per case),
    then the totals and how many cases ran on each drive path."""
    rows = [("case", "simulator", "path", "verdict", "mismatches", "diagnosis")]
    paths: dict[str, int] = {}
    for c in (_norm(c) for c in cases):
        v = c["verdict"]
        d = _diagnosis(v)
        diag = f"{d['kind']}: {d['message']}" if d else "-"
        if len(diag) > 100:
            diag = diag[:97] + "..."
        drive = str(c.get("drive") or "-")
        paths[drive] = paths.get(drive, 0) + 1
        rows.append((str(c["id"]), str(c.get("simulator") or "-"), drive, str(v.get("status", "?")),
                     str(v.get("mismatches", 0)), diag))
    widths = [max(len(r[i]) for r in rows) for i in range(5)]
    lines = []
    for k, r in enumerate(rows):
        cells = [r[i].ljust(widths[i]) for i in range(4)] + [r[4].rjust(widths[4]), r[5]]
        lines.append("  ".join(cells).rstrip())
        if k == 0:
            lines.append("  ".join("-" * w for w in widths) + "  " + "-" * 9)
    t = _totals([_norm(c) for c in cases])
    lines.append("")
    lines.append(f"{t['cases']} cases: {t['passed']} passed, {t['failed']} failed, {t['errors']} errors")
    lines.append("drive paths: " + ", ".join(f"{p} {n}" for p, n in sorted(paths.items())))
    return "\n".join(lines) + "\n"


def _junit(cases: Sequence[Mapping[str, Any]]) -> ET.ElementTree:
    t = _totals(cases)
    suites = ET.Element("testsuites", tests=str(t["cases"]), failures=str(t["failed"]), errors=str(t["errors"]))
    suite = ET.SubElement(suites, "testsuite", name="vkit", tests=str(t["cases"]),
                          failures=str(t["failed"]), errors=str(t["errors"]))
    for c in cases:
        v = c["verdict"]
        tc = ET.SubElement(suite, "testcase", name=str(c["id"]), classname=f"vkit.{c.get('simulator') or 'model'}")
        st = v.get("status")
        if st == "pass":
            continue
        d = _diagnosis(v)
        msg = d["message"] if d else f"status {st}"
        body = "\n".join(
            [f"status: {st}", f"mismatches: {v.get('mismatches', 0)}"]
            + [f"timing: {e}" for e in v.get("timing_errors", [])]
            + [f"{f['kind']} ({f['confidence']:.2f}): {f['message']}" for f in v.get("findings", [])]
        )
        el = ET.SubElement(tc, "error" if st == "error" else "failure", message=msg,
                           type=d["kind"] if d else str(st))
        el.text = body
    return ET.ElementTree(suites)


def write_run_report(cases: Sequence[Mapping[str, Any]], out_dir: str | Path) -> dict[str, str]:
    """Write ``report.json``, ``junit.xml`` and ``summary.txt`` for a whole run.

    Args:
        cases: one dict per case (see :func:`case_entry`): ``id``, ``verdict`` and optionally
            ``simulator``, ``seeds``, ``files`` (relative to ``out_dir``), ``coverage``.
        out_dir: the run's report folder (created if needed).

    Returns:
        ``{"json": ..., "junit": ..., "summary": ...}`` absolute paths of the three files.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    norm = [_norm(c) for c in cases]
    ids = [c["id"] for c in norm]
    dup = sorted({i for i in ids if ids.count(i) > 1})
    if dup:
        raise ConfigError(f"report: case id(s) {', '.join(dup[:5])} appear more than once; give every case its own id")
    body = {"totals": _totals(norm), "cases": [_report_case(c) for c in norm]}
    pj = out / "report.json"
    _write_atomic(pj, json.dumps(body, indent=2, default=_json_default).encode())
    px = out / "junit.xml"
    tree = _junit(norm)
    ET.indent(tree)
    xml = io.BytesIO()
    tree.write(xml, encoding="utf-8", xml_declaration=True)
    _write_atomic(px, xml.getvalue())
    ps = out / "summary.txt"
    _write_atomic(ps, format_summary(norm).encode())
    return {"json": str(pj), "junit": str(px), "summary": str(ps)}


def _write_atomic(path: Path, data: bytes) -> None:
    """Write ``path`` whole or not at all: a temporary file beside it, then a rename over it (POSIX atomic)."""
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        tmp.write_bytes(data)
        os.replace(tmp, path)
    finally:
        tmp.unlink(missing_ok=True)


def _rebase(files: Any, src: Path, dst: Path) -> Any:
    if isinstance(files, dict):
        return {k: _rebase(v, src, dst) for k, v in files.items()}
    if isinstance(files, list):
        return [_rebase(v, src, dst) for v in files]
    if isinstance(files, str) and files:
        return Path(os.path.relpath((src / files).resolve(), dst.resolve())).as_posix()
    return files


def _read_shard(p: Path) -> tuple[Path, dict[str, Any]]:
    """The path and body of one shard report (a folder means its report.json), checked against the schema."""
    if p.is_dir():
        p = p / "report.json"
    try:
        text = p.read_bytes().decode("utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        why = exc.strerror if isinstance(exc, OSError) and exc.strerror else "not UTF-8 text"
        raise ConfigError(f"merge: cannot read {p} ({why}); pass the report.json each shard wrote") from None
    try:
        body = json.loads(text)
    except ValueError as exc:
        raise ConfigError(f"merge: {p} is not JSON ({exc}); pass the report.json each shard wrote") from None
    check_report(body, f"merge: {p}")
    return p, body


def merge_reports(paths: Sequence[str | Path], out_dir: str | Path | None = None) -> dict[str, Any]:
    """Merge the ``report.json`` of several shards into one.

    Args:
        paths: ``report.json`` files (or the folders holding them).
        out_dir: when given, file paths are rebased to it and the merged ``report.json``,
            ``junit.xml`` and ``summary.txt`` are written there.

    Returns:
        The merged report (``totals`` and ``cases``, in shard order).

    Raises:
        ConfigError: a file is missing, unreadable or not a vkit report (checked against
            ``report.schema.json``), or two shards hold the same case id.
    """
    merged: list[dict[str, Any]] = []
    seen: dict[str, str] = {}
    dst = Path(out_dir) if out_dir is not None else None
    for p in paths:
        p, body = _read_shard(Path(p))
        for c in body["cases"]:
            if c["id"] in seen:
                raise ConfigError(
                    f"merge_reports: case {c['id']!r} is in both {seen[c['id']]} and {p}; shards must not overlap"
                )
            seen[c["id"]] = str(p)
            c = dict(c)
            if dst is not None:
                c["files"] = _rebase(c.get("files", {}), p.parent, dst)
            merged.append(c)
    result = {"totals": _totals(merged), "cases": merged}
    if dst is not None:
        write_run_report(merged, dst)
    return result
