"""Every subcommand of ``vkit`` given hostile arguments: exit code 2, one line, never a traceback.

Hostile means what a careless script or a tired user passes: missing files, folders where files go and
files where folders go, empty files, random bytes, huge and negative numbers, unknown options, unicode
and spaces in paths. Each call runs in-process through :func:`vkit.cli.main` (an exception escaping it
fails the test as a traceback would); a few run the installed console entry as a subprocess too.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from vkit.cli import build_parser, main

_BELT = str(Path(__file__).resolve().parents[1] / "sample_rtl" / "belt_cam.toml")
"""A real config (the conveyor camera sample) for the commands that need one before they read a dump."""

SUBCOMMANDS = ("run", "demo", "export", "replay", "merge", "model", "widths", "strength", "lut", "init", "pattern",
               "make-vars", "score-dump")
"""What ``vkit --help`` lists; test_every_subcommand_is_covered keeps this in step with the parser."""


@pytest.fixture(scope="module")
def junk(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    """Hostile files and folders: empty, random bytes, a folder, a missing path, unicode with spaces."""
    base = tmp_path_factory.mktemp("hostile")
    paths = {
        "empty": base / "empty.toml",
        "bytes": base / "random bytes.bin",
        "folder": base / "a folder",
        "missing": base / "nowhere" / "missing.toml",
        "unicode": base / "über frames ✓" / "vkit.toml",
        "file": base / "plain file.txt",
        "wave": base / "random wave.vcd",
        "empty_wave": base / "empty wave.fst",
    }
    paths["empty"].write_bytes(b"")
    paths["bytes"].write_bytes(bytes((i * 193 + 71) % 256 for i in range(4096)))  # fixed junk, no NULs spared
    paths["folder"].mkdir()
    paths["unicode"].parent.mkdir()
    paths["unicode"].write_text("[run]\nsimulators = [\"icarus\"]\n", encoding="utf-8")
    paths["file"].write_text("a file where a folder should be\n")
    paths["wave"].write_bytes(paths["bytes"].read_bytes())
    paths["empty_wave"].write_bytes(b"")
    return paths


def _cases(j: dict[str, Path]) -> list[list[str]]:
    """Argument vectors, each of which must be refused with exit code 2."""
    s = {k: str(v) for k, v in j.items()}
    return [
        # run
        ["run"], ["run", s["missing"]], ["run", s["folder"]], ["run", s["empty"]], ["run", s["bytes"]],
        ["run", s["unicode"]], ["run", s["missing"], "-j", "-1"], ["run", s["missing"], "-j", "99999999999999999999"],
        ["run", s["missing"], "--bogus"], ["run", s["empty"], "--shard", "0/0"], ["run", s["file"]],
        # demo (every call must stop before a simulator starts)
        ["demo", "--sim", "nosuch"], ["demo", "--path", "warp"], ["demo", "--bogus"], ["demo", "-j", "abc"],
        ["demo", "--out", str(j["file"] / "sub"), "--sim", "nosuch"],
        # export
        ["export"], ["export", s["missing"], "any/case"], ["export", s["folder"], "x"], ["export", s["bytes"], "x"],
        ["export", s["empty"], "x"], ["export", s["unicode"], "ü/✓", "--out", s["file"]],
        # replay
        ["replay", s["missing"]], ["replay", s["file"]], ["replay", s["folder"]], ["replay", s["folder"], "--capture", s["bytes"]],
        ["replay", s["folder"], "--capture", s["folder"]], ["replay", "--nope", s["folder"]],
        # merge
        ["merge", s["folder"]], ["merge", s["folder"], s["missing"]], ["merge", s["folder"], s["empty"]],
        ["merge", s["folder"], s["bytes"]], ["merge", s["folder"], s["folder"]], ["merge", s["file"], s["empty"]],
        ["merge", s["folder"], s["unicode"]],
        # model
        ["model", "edge", s["missing"]], ["model", "edge", s["folder"]], ["model", "edge", s["empty"]],
        ["model", "edge", s["bytes"]], ["model", "nosuchspec", s["bytes"]], ["model", s["bytes"], s["bytes"]],
        ["model", s["folder"], s["bytes"]], ["model", "edge", s["bytes"], "--out", s["file"]],
        # widths
        ["widths", s["missing"]], ["widths", s["folder"]], ["widths", s["empty"]], ["widths", s["bytes"]],
        ["widths", "ëdge ✓"], ["widths", "edge", "--bogus"],
        # make-vars
        ["make-vars", s["missing"], "--design", "d", "--sim", "icarus"], ["make-vars", s["bytes"], "--design", "d", "--sim", "icarus"],
        ["make-vars", s["folder"], "--design", "d", "--sim", "icarus"], ["make-vars", s["empty"], "--design", "d", "--sim", "icarus"],
        ["make-vars", s["unicode"], "--design", "nosuch", "--sim", "icarus"],
        ["make-vars", s["unicode"], "--design", "d", "--sim", "nosuchsim"], ["make-vars", s["unicode"]],
        ["make-vars", s["unicode"], "--design", "d", "--sim", "icarus", "--out", str(j["file"] / "x.mk")],
        # strength
        ["strength", s["missing"]], ["strength", s["bytes"]], ["strength", "edge", s["bytes"]],
        ["strength", "edge", s["folder"]], ["strength", "edge", "nosuchpattern"], ["strength", "edge", "impulse:-1"],
        ["strength", "edge", "--size", "100000x100000"], ["strength", "edge", "--size", "0x0"],
        ["strength", "edge", "--frames", "-2"], ["strength", "edge", "--frames", "1000000000"],
        # lut
        ["lut", "root", "-o", s["folder"]], ["lut", "root", "-o", str(j["file"] / "t.hex")],
        ["lut", "root", "--address-bits", "100000000", "-o", str(j["folder"] / "t.hex")],
        ["lut", "root", "--address-bits", "-3", "-o", str(j["folder"] / "t.hex")],
        ["lut", "root", "--data-bits", "0", "-o", str(j["folder"] / "t.hex")],
        ["lut", "root", "--data-bits", "100000", "-o", str(j["folder"] / "t.hex")],
        ["lut", "root", "--scale", "-8", "-o", str(j["folder"] / "t.hex")],
        ["lut", "root", "--scale", "99999999999999999999999", "-o", str(j["folder"] / "t.hex")],
        ["lut", "square", "-o", "x"], ["lut", "root"],
        # init
        ["init", "top", s["missing"], "--out", s["folder"]], ["init", "top", s["folder"], "--out", s["folder"]],
        ["init", "top", s["empty"], "--out", s["folder"]], ["init", "top", s["bytes"], "--out", s["folder"]],
        ["init", "top", s["unicode"], "--out", s["file"]], ["init", "tøp", s["bytes"], "-P", "=", "--out", s["folder"]],
        # pattern
        ["pattern", "nosuch", "-o", str(j["folder"] / "p.png")], ["pattern", "ramp_h", "-o", s["folder"]],
        ["pattern", "ramp_h", "--size", "100000x100000", "-o", str(j["folder"] / "p.png")],
        ["pattern", "ramp_h", "--size", "-4x4", "-o", str(j["folder"] / "p.png")],
        ["pattern", "ramp_h", "--size", "1e9x1", "-o", str(j["folder"] / "p.png")],
        ["pattern", "ramp_h", "--seed", "-1", "--size", "99999999999999999999x1", "-o", str(j["folder"] / "p.png")],
        ["pattern", "ramp_h", "-o", str(j["file"] / "p.png")], ["pattern", "ramp_h", "--bogus", "-o", "x.png"],
        # score-dump
        ["score-dump"], ["score-dump", s["missing"], s["wave"]], ["score-dump", s["bytes"], s["wave"]],
        ["score-dump", _BELT, s["missing"]], ["score-dump", _BELT, s["folder"]], ["score-dump", _BELT, s["bytes"]],
        ["score-dump", _BELT, s["wave"]], ["score-dump", _BELT, s["empty_wave"]],
        ["score-dump", _BELT, s["wave"], "--design", "nosuch"], ["score-dump", _BELT, s["wave"], "--signal", "in_de"],
        ["score-dump", _BELT, s["wave"], "--signal", "bogus_role=a.b"], ["score-dump", s["unicode"], s["wave"]],
    ]


def test_every_subcommand_is_covered(junk):
    parser_commands = set(build_parser()._subparsers._group_actions[0].choices)  # noqa: SLF001 - what --help lists
    assert parser_commands == set(SUBCOMMANDS)
    assert {argv[0] for argv in _cases(junk)} == set(SUBCOMMANDS)


@pytest.mark.parametrize("index", range(len(_cases({k: Path(k) for k in
                                                    ("empty", "bytes", "folder", "missing", "unicode", "file",
                                                     "wave", "empty_wave")}))))
def test_hostile_arguments_exit_2_with_one_line(junk, capsys, index, monkeypatch, tmp_path):
    monkeypatch.chdir(tmp_path)
    argv = _cases(junk)[index]
    code = main(argv)
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    assert code == 2, (argv, out, err)
    lines = err.strip().splitlines()
    if lines and lines[0].startswith("vkit: error:"):
        assert len(lines) == 1, lines  # vkit's own refusal is one line
    else:
        assert lines and lines[-1].startswith("vkit"), lines  # argparse: usage, then its one error line


@pytest.mark.parametrize("argv", [["merge", "OUT", "JUNK"], ["replay", "JUNK"], ["run", "JUNK"]])
def test_console_entry_never_prints_a_traceback(junk, argv, tmp_path):
    argv = [str(tmp_path / "out") if a == "OUT" else str(junk["bytes"]) if a == "JUNK" else a for a in argv]
    env = {**os.environ, "PYTHONIOENCODING": "utf-8"}
    done = subprocess.run([sys.executable, "-m", "vkit", *argv], capture_output=True, text=True, timeout=120, env=env)
    assert done.returncode == 2
    assert "Traceback" not in done.stdout + done.stderr
    assert len(done.stderr.strip().splitlines()) == 1, done.stderr
