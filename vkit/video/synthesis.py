"""Stimulus for the strength report: frames from pattern names or images, and the frames chosen to kill
the mutants a stimulus leaves alive."""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

import numpy as np

from vkit.core.errors import ConfigError
from vkit.core.validate import fail, want_int
from vkit.video.limits import check_case_size
from vkit.model.mutants import Mutant, spec_mutants
from vkit.model.spec import PipelineSpec
from vkit.model.strength import kill_sets
from vkit.video.images import load_image
from vkit.video.killers import KILLER_PARTS
from vkit.video.patterns import PATTERNS, pattern_in_format

__all__ = ["SCAFFOLD_PATTERNS", "KILLER_SEEDS", "stimulus_frames", "synthesize"]

SCAFFOLD_PATTERNS = ("impulse", "step_right", "checkerboard", "ramp_h", "noise", "conveyor:1", "conveyor:2",
                     "killers:0", "killers:2")
"""The stimulus a freshly scaffolded config runs (``vkit init`` writes it from this list), as ``name[:seed]``;
2 frames each (``killers`` seeds 0 and 2 with 2 frames give each of its four parts once)."""

KILLER_SEEDS = tuple(range(len(KILLER_PARTS)))
"""Seeds of the ``killers`` pattern that give each of its parts once."""

_CANDIDATE_SEEDS = 3
"""Extra seeds of each seeded candidate pattern offered to :func:`synthesize` (enough to find a second
border or colour frame when one is not enough; measured on the sample specs)."""


def stimulus_frames(spec: PipelineSpec, items: Sequence[str], width: int, height: int, frames: int = 2,
                    seed: int = 1) -> np.ndarray:
    """Frames of ``items`` in ``spec``'s input format: a pattern name (``name`` or ``name:seed``, frame k
    with seed + k, as a case makes them, at the spec's sample width and format) or an image file
    (centre-cropped to ``width`` x ``height``)."""
    want_int("vkit strength", "--frames", frames, 1)
    check_case_size("vkit strength", frames, width, height)
    out = []
    for item in items:
        name, _, own = item.partition(":")
        if name in PATTERNS:
            base = want_int("vkit strength", f"seed of {name}", int(own), 0) if own.lstrip("-").isdigit() else seed
            if own and not own.lstrip("-").isdigit():
                raise fail("vkit strength", "stimulus", item, "not NAME or NAME:SEED", "give the seed as a whole number >= 0")
            out += [pattern_in_format(name, height, width, spec.input, seed=base + k) for k in range(frames)]
            continue
        if not Path(item).is_file():
            raise ConfigError(f"stimulus {item!r} is neither a pattern ({', '.join(PATTERNS)}) nor an image file; "
                              "fix the name or the path")
        img = load_image(item, mode=spec.input)
        top, left = max(0, (img.shape[0] - height) // 2), max(0, (img.shape[1] - width) // 2)
        out.append(img[top : top + height, left : left + width])
    shapes = {f.shape for f in out}
    if len(shapes) != 1:
        raise ConfigError(f"stimulus frames have different sizes {sorted(shapes)}; give images of at least "
                          f"{width}x{height} pixels")
    return np.stack(out)


def _candidates(spec: PipelineSpec, width: int, height: int) -> list[tuple[str, np.ndarray]]:
    seeds = range(len(KILLER_PARTS) * _CANDIDATE_SEEDS)
    out = [(f"killers:{s}", pattern_in_format("killers", height, width, spec.input, seed=s)) for s in seeds]
    out += [(f"noise:{s}", pattern_in_format("noise", height, width, spec.input, seed=s)) for s in range(_CANDIDATE_SEEDS)]
    return out


def synthesize(spec: PipelineSpec, frames: np.ndarray, width: int, height: int,
               mutants: Sequence[Mutant] | None = None) -> list[tuple[str, np.ndarray]]:
    """Frames that kill the mutants ``frames`` leave alive, chosen greedily (each pick kills the most of
    the rest) from the ``killers`` parts and noise; ``(label, frame)`` pairs, label ``pattern:seed``.

    Mutants no candidate kills stay alive (the strength report gives the reason)."""
    mutants = [m for m in (spec_mutants(spec) if mutants is None else mutants) if not m.equivalent]
    alive = ~np.any(kill_sets(spec, frames, mutants), axis=0) if len(frames) else np.ones(len(mutants), bool)
    pool = _candidates(spec, width, height)
    kills = kill_sets(spec, np.stack([f for _, f in pool]), mutants)
    chosen = []
    while alive.any():
        gains = [int(np.count_nonzero(k & alive)) for k in kills]
        best = int(np.argmax(gains))
        if gains[best] == 0:
            break
        chosen.append(pool[best])
        alive &= ~kills[best]
    return chosen
