"""A capture whose per-sample arrays stay on disk and are read a frame at a time: bounded memory on long runs.

    spill = CaptureSpill(folder, value_dtype=np.int16)      # the reader appends decoded samples as they come
    spill.add(values, clock, frame, line, column)           # frame numbers never go down
    cap = spill.capture(facts)                              # a StoredCapture on the spill files
    cap.save("capture.npz")                                 # streamed into an uncompressed .npz; cap now reads it
    cap = open_capture("capture.npz")                       # the same, later (None for a compressed file)

A :class:`StoredCapture` is a :class:`~vkit.video.capture.Capture`: the scoreboard reads it frame by frame
(:meth:`~vkit.video.capture.Capture.frame_part`), so a passing run of ten 1920x1080 frames never holds more
than one frame's samples; code that asks for a whole array (``cap.values``) gets it read from disk each time.
"""

from __future__ import annotations

import json
import zipfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from vkit.core.errors import ConfigError
from vkit.video.capture import Capture, RunFacts

__all__ = ["CaptureSpill", "StoredCapture", "open_capture"]

_FIELDS = ("values", "clock", "frame", "line", "column")
"""The per-sample arrays of a capture, in :class:`Capture`'s order."""
_PLACE_DTYPE = np.dtype("<i4")
"""Frame, line and column on disk (a line or a run past 2**31 samples is refused)."""
_CLOCK_DTYPE = np.dtype("<i8")
_COPY_BYTES = 1 << 24
"""Bytes copied at a time when the spill files are streamed into the .npz."""


@dataclass(frozen=True)
class _Stored:
    """One per-sample array in a file: ``count`` items of ``dtype`` from byte ``offset``."""

    path: Path
    offset: int
    dtype: np.dtype
    count: int

    def read(self, lo: int = 0, hi: int | None = None) -> np.ndarray:
        hi = self.count if hi is None else hi
        if hi <= lo:
            return np.zeros(0, self.dtype)
        return np.fromfile(self.path, self.dtype, count=hi - lo, offset=self.offset + lo * self.dtype.itemsize)


class StoredCapture(Capture):
    """A :class:`Capture` read from files a frame at a time (see the module docstring).

    Args:
        stored: each per-sample array's place on disk (:data:`_FIELDS`).
        frame_sizes: samples in each frame, frame 0 first (frames follow each other on disk).
        facts: the run facts (kept in memory).
        spill: the files are a reader's spill folder, removed once :meth:`save` has copied them.
    """

    def __init__(self, stored: dict[str, _Stored], frame_sizes: np.ndarray, facts: RunFacts,
                 spill: Path | None = None) -> None:
        self._stored = stored
        self._starts = np.concatenate([[0], np.cumsum(frame_sizes, dtype=np.int64)])
        self._spill = spill
        self.facts = facts

    def __repr__(self) -> str:
        return f"StoredCapture({len(self)} samples in {self.frame_count} frames, {self._stored['values'].path})"

    def _whole(self, name: str) -> np.ndarray:
        return self._stored[name].read()

    values = property(lambda self: self._whole("values"), doc="Every sample's value (read from disk).")
    clock = property(lambda self: self._whole("clock"), doc="Every sample's clock (read from disk).")
    frame = property(lambda self: self._whole("frame"), doc="Every sample's frame (read from disk).")
    line = property(lambda self: self._whole("line"), doc="Every sample's line (read from disk).")
    column = property(lambda self: self._whole("column"), doc="Every sample's column (read from disk).")

    def __len__(self) -> int:
        return int(self._starts[-1])

    @property
    def frame_count(self) -> int:
        """Output frames that carried at least one pixel."""
        return int(self._starts.size - 1)

    def with_facts(self, facts: RunFacts) -> Capture:
        """The same samples with other run facts (the files are shared)."""
        return StoredCapture(self._stored, np.diff(self._starts), facts, self._spill)

    def samples_from_frame(self, first: int) -> int:
        """Samples that fell in frame ``first`` or any later one."""
        return len(self) - int(self._starts[min(max(first, 0), self.frame_count)])

    def frame_part(self, index: int, names: tuple[str, ...]) -> tuple[np.ndarray, ...]:
        """The named per-sample arrays of frame ``index``, read from disk."""
        if not 0 <= index < self.frame_count:
            return tuple(np.zeros(0, self._stored[n].dtype) for n in names)
        lo, hi = int(self._starts[index]), int(self._starts[index + 1])
        return tuple(self._stored[name].read(lo, hi) for name in names)

    def save(self, path: str | Path, compress: bool = False) -> Path:
        """Write the capture as an uncompressed ``.npz`` (what :meth:`Capture.load` reads), copied from disk a
        block at a time; from then on this capture reads that file (a spill folder is removed).
        ``compress`` is ignored: a compressed member cannot be read a frame at a time."""
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.with_name(f"{path.name}.tmp")
        with zipfile.ZipFile(tmp, "w", zipfile.ZIP_STORED, allowZip64=True) as zf:
            for name in _FIELDS:
                with zf.open(f"{name}.npy", "w", force_zip64=True) as out:
                    _copy_member(self._stored[name], out)
            with zf.open("meta.npy", "w") as out:
                np.lib.format.write_array(out, np.array(json.dumps(self.facts.to_dict())))
        tmp.replace(path)
        self._stored = _npz_members(path)  # type: ignore[assignment]
        if self._spill is not None:
            _remove_spill(self._spill)
            self._spill = None
        return path


def _remove_spill(folder: Path) -> None:
    """Remove a spill folder's files, and the folder when nothing else is in it."""
    for name in _FIELDS:
        (folder / f"{name}.raw").unlink(missing_ok=True)
    if folder.is_dir() and not any(folder.iterdir()):
        folder.rmdir()


def _copy_member(src: _Stored, out: object) -> None:
    """One array into an open .npz member: the .npy header, then its bytes a block at a time."""
    header = {"descr": np.lib.format.dtype_to_descr(src.dtype), "fortran_order": False, "shape": (src.count,)}
    np.lib.format.write_array_header_2_0(out, header)  # type: ignore[arg-type]
    left = src.count * src.dtype.itemsize
    with open(src.path, "rb") as fh:
        fh.seek(src.offset)
        while left > 0:
            block = fh.read(min(left, _COPY_BYTES))
            if not block:
                raise ConfigError(f"capture: {src.path} ended early; rerun the case")
            out.write(block)  # type: ignore[attr-defined]
            left -= len(block)


def _npz_members(path: Path) -> dict[str, _Stored] | None:
    """Where each per-sample array's data starts in an uncompressed .npz (None: compressed or not all there)."""
    out: dict[str, _Stored] = {}
    with zipfile.ZipFile(path) as zf, open(path, "rb") as fh:
        for name in _FIELDS:
            try:
                info = zf.getinfo(f"{name}.npy")
            except KeyError:
                return None
            if info.compress_type != zipfile.ZIP_STORED:
                return None
            fh.seek(info.header_offset + 26)
            name_len, extra_len = np.frombuffer(fh.read(4), "<u2")
            fh.seek(info.header_offset + 30 + int(name_len) + int(extra_len))
            version = np.lib.format.read_magic(fh)
            read_header = np.lib.format.read_array_header_1_0 if version == (1, 0) else np.lib.format.read_array_header_2_0
            shape, fortran, dtype = read_header(fh)
            if fortran or len(shape) != 1:
                return None
            out[name] = _Stored(path, fh.tell(), dtype, int(shape[0]))
    return out


def open_capture(path: str | Path) -> Capture | None:
    """A capture saved uncompressed (:meth:`StoredCapture.save`, ``Capture.save(compress=False)``) opened to be
    read a frame at a time; None when the file is compressed or its frame numbers go down (load it whole)."""
    path = Path(path)
    stored = _npz_members(path)
    if stored is None:
        return None
    with np.load(path, allow_pickle=False) as z:
        facts = RunFacts.from_dict(json.loads(str(z["meta"])))
    sizes = _frame_sizes(stored["frame"])
    return None if sizes is None else StoredCapture(stored, sizes, facts)


def _frame_sizes(frame: _Stored) -> np.ndarray | None:
    """Samples per frame, read a block at a time; None when the frame numbers ever go down."""
    sizes = np.zeros(0, np.int64)
    last = 0
    step = _COPY_BYTES // frame.dtype.itemsize
    for lo in range(0, frame.count, step):
        part = frame.read(lo, min(frame.count, lo + step)).astype(np.int64)
        if part.size and (int(part[0]) < last or bool(np.any(part[1:] < part[:-1])) or int(part[0]) < 0):
            return None
        if part.size:
            sizes = _add_counts(sizes, part)
            last = int(part[-1])
    return sizes


def _add_counts(sizes: np.ndarray, frames: np.ndarray) -> np.ndarray:
    """``sizes`` (samples per frame) with the non-decreasing frame numbers ``frames`` counted in."""
    counts = np.bincount(frames)
    if counts.size > sizes.size:
        sizes = np.concatenate([sizes, np.zeros(counts.size - sizes.size, np.int64)])
    sizes[: counts.size] += counts
    return sizes


class CaptureSpill:
    """Decoded samples appended to raw files in ``folder`` as a reader decodes them (one block's arrays in memory).

    Args:
        folder: where the files go (made; emptied of earlier spill files).
        value_dtype: the values' dtype on disk (the smallest that holds the bus).
    """

    def __init__(self, folder: str | Path, value_dtype: np.dtype | type) -> None:
        self.folder = Path(folder)
        self.folder.mkdir(parents=True, exist_ok=True)
        self._dtypes = {"values": np.dtype(value_dtype).newbyteorder("<"), "clock": _CLOCK_DTYPE,
                        "frame": _PLACE_DTYPE, "line": _PLACE_DTYPE, "column": _PLACE_DTYPE}
        self._files = {n: open(self.folder / f"{n}.raw", "wb") for n in _FIELDS}
        self._sizes = np.zeros(0, np.int64)
        self.size = 0

    def add(self, values: np.ndarray, clock: np.ndarray, frame: np.ndarray, line: np.ndarray,
            column: np.ndarray) -> None:
        """Append one block of samples (frame numbers not below the last block's)."""
        for name, part in zip(_FIELDS, (values, clock, frame, line, column)):
            dtype = self._dtypes[name]
            limits = np.iinfo(dtype)
            if part.size and name != "clock" and not limits.min <= int(part.min()) <= int(part.max()) <= limits.max:
                raise ConfigError(f"capture: a {name} of {int(part.max())} does not fit {dtype.name} on disk; "
                                  "split the run into shorter ones")
            np.ascontiguousarray(part, dtype).tofile(self._files[name])
        if frame.size:
            self._sizes = _add_counts(self._sizes, np.asarray(frame, np.int64))
        self.size += int(values.size)

    def capture(self, facts: RunFacts) -> StoredCapture:
        """Close the files and give the :class:`StoredCapture` reading them."""
        for fh in self._files.values():
            fh.close()
        stored = {n: _Stored(self.folder / f"{n}.raw", 0, self._dtypes[n], self.size) for n in _FIELDS}
        return StoredCapture(stored, self._sizes, facts, spill=self.folder)
