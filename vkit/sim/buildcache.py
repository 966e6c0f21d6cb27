"""A content-keyed cache of simulator builds, shared safely by parallel processes.

The key is a SHA-256 over everything that changes what a build produces: simulator and its version,
top level, the CONTENTS of every source file (and of files named by string parameters), parameters,
defines, language, build arguments and :data:`BUILD_FORMAT`. Images, timings, stalls and seeds are
run-time inputs and never enter the key, so one build serves every case of a design.

A finished build leaves a stamp file; a build dir without it is rebuilt from scratch. Builds of one
key are serialised with ``fcntl.flock`` on a lock file, so parallel workers wait for each other.
"""

from __future__ import annotations

import fcntl
import hashlib
import json
import os
import shutil
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable

from vkit.core.errors import ConfigError

__all__ = ["BUILD_FORMAT", "STAMP_NAME", "BuildRequest", "BuildOutcome", "BuildCache", "build_key", "default_cache_dir",
           "check_cache_dir"]

BUILD_FORMAT = "vkit-build-1"
"""Version of how vkit invokes builds; changing it invalidates every cached build."""

STAMP_NAME = "vkit-build.json"
"""File a finished build leaves in its folder."""


@dataclass(frozen=True)
class BuildRequest:
    """Everything that decides one build's output.

    Attributes:
        simulator: simulator name.
        tool_version: the simulator's version text.
        top: top-level module / entity.
        sources: source files in compile order.
        language: ``"verilog"`` or ``"vhdl"``.
        parameters: parameters / generics (values as passed to the tool).
        defines: Verilog defines.
        build_args: extra tool arguments.
        data_files: files the design reads (e.g. a ``$readmemh`` table); their contents enter the key.
        include_dirs: include folders (their names enter the key).
    """

    simulator: str
    tool_version: str
    top: str
    sources: tuple[Path, ...]
    language: str
    parameters: tuple[tuple[str, str], ...] = ()
    defines: tuple[tuple[str, str], ...] = ()
    build_args: tuple[str, ...] = ()
    data_files: tuple[Path, ...] = ()
    include_dirs: tuple[Path, ...] = ()

    @classmethod
    def make(cls, simulator: str, tool_version: str, top: str, sources: Any, language: str, *,
             parameters: dict[str, Any] | None = None, defines: dict[str, Any] | None = None,
             build_args: Any = (), data_files: Any = (), include_dirs: Any = ()) -> BuildRequest:
        """Build a request from plain dicts and lists (values are stored as text, keys sorted)."""
        return cls(
            simulator, tool_version, top, tuple(Path(s) for s in sources), language,
            tuple(sorted((str(k), str(v)) for k, v in (parameters or {}).items())),
            tuple(sorted((str(k), str(v)) for k, v in (defines or {}).items())),
            tuple(str(a) for a in build_args),
            tuple(Path(p) for p in data_files),
            tuple(Path(p) for p in include_dirs),
        )

    def describe(self) -> dict[str, Any]:
        """Plain-data form stored in the stamp file."""
        return {
            "simulator": self.simulator, "tool_version": self.tool_version, "top": self.top,
            "sources": [str(s) for s in self.sources], "language": self.language,
            "parameters": dict(self.parameters), "defines": dict(self.defines),
            "build_args": list(self.build_args), "data_files": [str(p) for p in self.data_files],
            "include_dirs": [str(p) for p in self.include_dirs], "format": BUILD_FORMAT,
        }


def _file_digest(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 16), b""):
            h.update(chunk)
    return h.hexdigest()


def build_key(request: BuildRequest) -> str:
    """SHA-256 hex digest of the request (source order kept: it is the compile order)."""
    h = hashlib.sha256()

    def put(tag: str, value: str) -> None:
        data = value.encode("utf-8")
        h.update(f"{tag}:{len(data)}:".encode())
        h.update(data)

    put("format", BUILD_FORMAT)
    put("simulator", request.simulator)
    put("tool_version", request.tool_version)
    put("top", request.top)
    put("language", request.language)
    for src in request.sources:
        # the file NAME matters to some tools (error lines, VHDL libraries); its contents decide the build.
        # GHDL (mcode) reads the analysed files again when it elaborates, so its build also keeps the PATH:
        # a copy of the sources elsewhere (a fresh clone, a deleted checkout) gets a build of its own.
        name = str(src.resolve()) if request.simulator == "ghdl" else src.name
        put("source", f"{name}={_file_digest(src)}")
    for k, v in request.parameters:
        put("param", f"{k}={v}")
    for k, v in request.defines:
        put("define", f"{k}={v}")
    for a in request.build_args:
        put("arg", a)
    for p in request.data_files:
        put("data", f"{p.name}={_file_digest(p)}")
    for p in request.include_dirs:
        put("include", str(p))
    return h.hexdigest()


def default_cache_dir() -> Path:
    """``$VKIT_CACHE_DIR`` if set, else ``~/.cache/vkit/builds``."""
    env = os.environ.get("VKIT_CACHE_DIR")
    if env:
        return Path(env).expanduser().resolve()
    return Path.home() / ".cache" / "vkit" / "builds"


def check_cache_dir(cache_dir: Path) -> None:
    """Raise one ConfigError line when ``cache_dir`` (or the first of its parents that exists) is not a folder."""
    probe = cache_dir
    while not probe.exists() and probe.parent != probe:
        probe = probe.parent
    if not probe.is_dir():
        what = "is a file" if probe == cache_dir else f"lies under {probe}, which is a file"
        raise ConfigError(f"build cache: cache_dir = {str(cache_dir)!r} {what}, not a folder; point [run] cache_dir "
                          "(or $VKIT_CACHE_DIR) at a folder")


@dataclass
class BuildOutcome:
    """Result of :meth:`BuildCache.ensure`.

    Attributes:
        build_dir: folder holding the build.
        key: the full build key.
        reused: True when a finished build was found and nothing was built.
        seconds: wall time of the build itself (0.0 when reused), s.
        waited_s: time spent waiting for another process's lock, s.
    """

    build_dir: Path
    key: str
    reused: bool
    seconds: float = 0.0
    waited_s: float = 0.0
    info: dict[str, Any] = field(default_factory=dict)


class BuildCache:
    """Build folders ``<cache_dir>/<sim>-<top>-<key[:12]>``, each finished build marked by a stamp file."""

    def __init__(self, cache_dir: str | Path | None = None) -> None:
        self.cache_dir = Path(cache_dir).resolve() if cache_dir is not None else default_cache_dir()

    def build_dir(self, request: BuildRequest, key: str | None = None) -> Path:
        """The folder the request builds into."""
        key = key or build_key(request)
        safe_top = "".join(ch if ch.isalnum() or ch in "_-" else "_" for ch in request.top)
        return self.cache_dir / f"{request.simulator}-{safe_top}-{key[:12]}"

    def is_built(self, request: BuildRequest) -> bool:
        """True when a finished build of this request is in the cache."""
        return (self.build_dir(request) / STAMP_NAME).is_file()

    def ensure(self, request: BuildRequest, builder: Callable[[Path], None]) -> BuildOutcome:
        """Return the finished build of ``request``, calling ``builder(build_dir)`` only when needed.

        Holds an exclusive lock on ``<build_dir>.lock`` while checking and building, so another
        process asking for the same key waits and then reuses the result. A build that raises leaves
        no stamp (the next call starts again from an empty folder); the exception propagates.
        """
        key = build_key(request)
        bdir = self.build_dir(request, key)
        stamp = bdir / STAMP_NAME
        if stamp.is_file():
            return BuildOutcome(bdir, key, True)
        check_cache_dir(self.cache_dir)
        try:
            self.cache_dir.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise ConfigError(f"build cache: cache_dir = {str(self.cache_dir)!r} cannot be made ({exc.strerror}); "
                              "point [run] cache_dir (or $VKIT_CACHE_DIR) at a writable folder") from None
        lock_path = bdir.with_name(bdir.name + ".lock")
        t0 = time.monotonic()
        with open(lock_path, "a") as lock:
            fcntl.flock(lock.fileno(), fcntl.LOCK_EX)
            waited = time.monotonic() - t0
            try:
                if stamp.is_file():
                    return BuildOutcome(bdir, key, True, 0.0, waited)
                if bdir.exists():
                    shutil.rmtree(bdir)
                bdir.mkdir(parents=True)
                t1 = time.monotonic()
                builder(bdir)
                seconds = time.monotonic() - t1
                info = {"key": key, "seconds": round(seconds, 3), "built_at": time.time(), **request.describe()}
                tmp = stamp.with_suffix(".tmp")
                tmp.write_text(json.dumps(info, indent=2) + "\n")
                os.replace(tmp, stamp)
                return BuildOutcome(bdir, key, False, seconds, waited, info)
            finally:
                fcntl.flock(lock.fileno(), fcntl.LOCK_UN)
