"""Scaling past one machine: ``--shard auto`` reads the array-job index and count that batch schedulers and CI
matrices set, and the pytest plugin runs under pytest-xdist.

Variable names and numbering (from memory of each scheduler's documentation): Slurm sets
SLURM_ARRAY_TASK_ID with SLURM_ARRAY_TASK_MIN/_STEP/_COUNT for ``sbatch --array``; Grid Engine sets
SGE_TASK_ID with SGE_TASK_FIRST/_LAST/_STEPSIZE for ``qsub -t``; GitLab CI sets CI_NODE_INDEX (1-based)
and CI_NODE_TOTAL for ``parallel: N``; CircleCI CIRCLE_NODE_INDEX (0-based) and CIRCLE_NODE_TOTAL;
Buildkite BUILDKITE_PARALLEL_JOB (0-based) and BUILDKITE_PARALLEL_JOB_COUNT.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import simulator_available
from vkit.core.errors import ConfigError
from vkit.run.config import expand_matrix, load_config, shard_cases, shard_from_environment

MANIFEST = Path(__file__).resolve().parents[1] / "sample_rtl" / "designs.toml"
_BODY = (f'[[import]]\nmanifest = "{MANIFEST}"\nuse = ["blur_core"]\n'
         '[stimulus]\npatterns = ["impulse", "columns", "checkerboard", "step_right", "step_down"]\n'
         'timings = ["tiny32x24"]\n')


@pytest.mark.parametrize(("env", "shard", "source"), [
    # sbatch --array=0-3: four tasks numbered 0..3
    ({"SLURM_ARRAY_TASK_ID": "2", "SLURM_ARRAY_TASK_MIN": "0", "SLURM_ARRAY_TASK_COUNT": "4"}, (3, 4), "Slurm job array"),
    # sbatch --array=1-7:2 -> tasks 1, 3, 5, 7
    ({"SLURM_ARRAY_TASK_ID": "5", "SLURM_ARRAY_TASK_MIN": "1", "SLURM_ARRAY_TASK_STEP": "2",
      "SLURM_ARRAY_TASK_COUNT": "4"}, (3, 4), "Slurm job array"),
    # qsub -t 1-6 (no step variable set: step 1)
    ({"SGE_TASK_ID": "6", "SGE_TASK_FIRST": "1", "SGE_TASK_LAST": "6"}, (6, 6), "Grid Engine array job"),
    ({"SGE_TASK_ID": "11", "SGE_TASK_FIRST": "1", "SGE_TASK_LAST": "21", "SGE_TASK_STEPSIZE": "10"}, (2, 3),
     "Grid Engine array job"),
    ({"CI_NODE_INDEX": "1", "CI_NODE_TOTAL": "3"}, (1, 3), "GitLab CI parallel job"),
    ({"CIRCLE_NODE_INDEX": "0", "CIRCLE_NODE_TOTAL": "2"}, (1, 2), "CircleCI parallelism"),
    ({"BUILDKITE_PARALLEL_JOB": "4", "BUILDKITE_PARALLEL_JOB_COUNT": "5"}, (5, 5), "Buildkite parallel job"),
    ({"VKIT_SHARD": "2/9", "CI_NODE_INDEX": "1", "CI_NODE_TOTAL": "3"}, (2, 9), "vkit"),  # the explicit one wins
])
def test_shard_comes_from_the_array_job_variables(env, shard, source) -> None:
    assert shard_from_environment(env) == (shard, source)


@pytest.mark.parametrize(("env", "words"), [
    ({}, "no array-job index is set (looked for VKIT_SHARD, SLURM_ARRAY_TASK_ID"),
    ({"SLURM_ARRAY_TASK_ID": "3"}, "SLURM_ARRAY_TASK_COUNT is not set"),
    ({"CI_NODE_INDEX": "4", "CI_NODE_TOTAL": "3"}, "CI_NODE_INDEX = 4 does not fall on the array's steps"),
    ({"SGE_TASK_ID": "x", "SGE_TASK_LAST": "3"}, "SGE_TASK_ID = 'x' is not a whole number"),
])
def test_shard_auto_refuses_what_is_not_a_shard(env, words) -> None:
    with pytest.raises(ConfigError) as err:
        shard_from_environment(env)
    assert words in str(err.value)


def test_array_tasks_split_the_matrix_like_explicit_shards(tmp_path, monkeypatch) -> None:
    cfg = tmp_path / "vkit.toml"
    cfg.write_text(f'[run]\nout_dir = "out"\n{_BODY}')
    cases = expand_matrix(load_config(cfg), ["icarus"])
    seen = []
    for task in range(3):  # sbatch --array=0-2
        monkeypatch.setenv("SLURM_ARRAY_TASK_ID", str(task))
        monkeypatch.setenv("SLURM_ARRAY_TASK_MIN", "0")
        monkeypatch.setenv("SLURM_ARRAY_TASK_COUNT", "3")
        part = shard_cases(cases, "auto")
        assert [c.id for c in part] == [c.id for c in shard_cases(cases, (task + 1, 3))]
        seen += [c.id for c in part]
    assert sorted(seen) == sorted(c.id for c in cases)


def _env(**extra: str) -> dict[str, str]:
    env = {k: v for k, v in os.environ.items() if not k.startswith(("PYTEST_", "SLURM_", "CI_NODE", "VKIT_SHARD"))}
    env.update(extra)
    return env


@pytest.mark.sim
def test_vkit_run_shard_auto_in_a_faked_gitlab_parallel_job(tmp_path, build_cache_dir) -> None:
    simulator_available("icarus")
    cfg = tmp_path / "vkit.toml"
    cfg.write_text(f'[run]\nout_dir = "out"\ncache_dir = "{build_cache_dir}"\n{_BODY}')
    ids = []
    for node in (1, 2):
        out = tmp_path / f"shard{node}"
        proc = subprocess.run([sys.executable, "-m", "vkit", "run", str(cfg), "--sim", "icarus", "--shard", "auto",
                               "--out", str(out)], env=_env(CI_NODE_INDEX=str(node), CI_NODE_TOTAL="2"),
                              capture_output=True, text=True, timeout=600, check=False)
        assert proc.returncode == 0, proc.stdout[-2000:] + proc.stderr[-2000:]
        assert f"shard {node}/2 from the GitLab CI parallel job variables" in proc.stdout
        ids.append({c["id"] for c in json.loads((out / "report.json").read_text())["cases"]})
    assert not ids[0] & ids[1] and len(ids[0] | ids[1]) == 5


@pytest.mark.sim
def test_pytest_plugin_under_xdist_writes_one_report_of_every_case(tmp_path, build_cache_dir) -> None:
    simulator_available("icarus")
    pytest.importorskip("xdist")
    repo = tmp_path / "repo"
    repo.mkdir()
    (repo / "vkit.toml").write_text(f'[run]\nout_dir = "out"\ncache_dir = "{build_cache_dir}"\n{_BODY}')
    (repo / "conftest.py").write_text('pytest_plugins = ["vkit.pytest_plugin"]\n')
    proc = subprocess.run([sys.executable, "-m", "pytest", "-p", "no:cacheprovider", "-q", "-n", "2",
                           "--vkit-sim", "icarus"], cwd=repo, env=_env(), capture_output=True, text=True, timeout=600,
                          check=False)
    assert proc.returncode == 0, proc.stdout[-3000:]
    assert "5 passed" in proc.stdout
    report = json.loads((repo / "out" / "pytest" / "report.json").read_text())
    assert report["totals"] == {"cases": 5, "passed": 5, "failed": 0, "errors": 0}
    assert {c["drive"] for c in report["cases"]} == {"native"}
