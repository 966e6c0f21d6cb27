"""Drawn pattern frames kept in the build cache: the next run reads the very frames it would draw."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from vkit.run.config import expand_matrix, load_config
from vkit.run.inputs import FRAMES_CACHE, make_frames

RTL = Path(__file__).resolve().parent.parent / "sample_rtl"


def _case(tmp_path: Path, seed: int):
    cfg = tmp_path / f"vkit{seed}.toml"
    cfg.write_text(f'[run]\nout_dir = "out"\nsimulators = ["icarus"]\n'
                   f'[[import]]\nmanifest = "{RTL / "designs.toml"}"\nuse = ["edge_core"]\n'
                   f'[stimulus]\npatterns = ["conveyor"]\nsize = [32, 24]\nframes = 2\nseeds = [{seed}]\n')
    (case,) = expand_matrix(load_config(cfg))
    return case


def test_kept_frames_are_the_drawn_frames_and_a_new_seed_draws_anew(tmp_path):
    # the reference is drawing without a cache (vkit.video.patterns, the demo scene)
    cache = tmp_path / "cache"
    case = _case(tmp_path, 4)
    drawn = make_frames(case)
    first = make_frames(case, cache)
    kept = list((cache / FRAMES_CACHE).glob("*.npy"))
    again = make_frames(case, cache)
    assert len(kept) == 1 and np.array_equal(first, drawn) and np.array_equal(again, drawn)
    assert again.dtype == drawn.dtype and again.shape == (2, 24, 32, 3)
    other = make_frames(_case(tmp_path, 5), cache)
    assert len(list((cache / FRAMES_CACHE).glob("*.npy"))) == 2 and not np.array_equal(other, drawn)
    kept[0].write_bytes(b"not an array")  # a damaged entry is drawn and kept again
    assert np.array_equal(make_frames(case, cache), drawn)
