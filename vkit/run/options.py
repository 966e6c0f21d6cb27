"""The run options: how every case of one run is carried out, fixed when the run starts."""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path

from vkit.core.validate import want_choice, want_int, want_number
from vkit.core.vocab import DRIVE_DEFAULT, DRIVE_MODES, WAVE_MODES
from vkit.run.config import PICTURE_MODES, RunSettings
from vkit.sim.buildcache import check_cache_dir, default_cache_dir

__all__ = ["RunOptions"]


@dataclass(frozen=True)
class RunOptions:
    """What a run and each of its per-case workers need besides the case itself.

    Attributes:
        out_dir: report folder (absolute).
        jobs: worker processes, >= 1.
        cache_dir: build cache folder, or None for the default (``$VKIT_CACHE_DIR`` or ``~/.cache/vkit/builds``).
        timeout_s: wall-clock limit of one simulation, seconds, > 0.
        max_listed: mismatching pixels listed per case in the report, >= 0.
        coverage_floor: share of a stage's range below which a case gets a coverage warning, 0..1.
        waves: ``"failing"``, ``"all"`` or ``"off"`` (:data:`vkit.core.vocab.WAVE_MODES`).
        pictures: ``"failing"`` or ``"all"``.
        drive: ``"auto"`` (the default: per case, the fastest path that can run it, see
            :func:`vkit.run.builds.pick_drive`), ``"clock"``, ``"fast"`` or ``"native"``
            (:data:`vkit.core.vocab.DRIVE_MODES`).
        config_path: the config the cases came from (absolute), for the rerun command; None for none.
    """

    out_dir: Path
    jobs: int = 1
    cache_dir: Path | None = None
    timeout_s: float = 600.0
    max_listed: int = 20
    coverage_floor: float = 0.5
    waves: str = "failing"
    pictures: str = "failing"
    drive: str = DRIVE_DEFAULT
    config_path: Path | None = None

    def __post_init__(self) -> None:
        where = "run options"
        want_int(where, "jobs", self.jobs, 1)
        want_number(where, "timeout_s", self.timeout_s, 0)
        want_int(where, "max_listed", self.max_listed, 0)
        want_number(where, "coverage_floor", self.coverage_floor, 0, 1)
        want_choice(where, "waves", self.waves, WAVE_MODES)
        want_choice(where, "pictures", self.pictures, PICTURE_MODES)
        want_choice(where, "drive", self.drive, DRIVE_MODES)
        check_cache_dir(self.cache_dir if self.cache_dir is not None else default_cache_dir())

    @classmethod
    def make(cls, out_dir: str | Path, *, cache_dir: str | Path | None = None,
             config_path: str | Path | None = None, **options: object) -> RunOptions:
        """Options with the folders and the config path made absolute; ``options`` as the attributes."""
        return cls(
            out_dir=Path(out_dir).resolve(),
            cache_dir=Path(cache_dir).resolve() if cache_dir is not None else None,
            config_path=Path(config_path).resolve() if config_path is not None else None,
            **options,  # type: ignore[arg-type]
        )

    def with_out_dir(self, out_dir: str | Path) -> RunOptions:
        """The same options writing into ``out_dir`` (made absolute)."""
        return replace(self, out_dir=Path(out_dir).resolve())

    @classmethod
    def from_settings(cls, run: RunSettings, config_path: str | Path | None = None, **overrides: object) -> RunOptions:
        """The options a config's ``[run]`` table gives, with ``overrides`` (e.g. ``jobs``) where not None."""
        options: dict[str, object] = dict(
            out_dir=run.out_dir, jobs=run.jobs, cache_dir=run.cache_dir, timeout_s=run.timeout_s,
            max_listed=run.max_listed, coverage_floor=run.coverage_floor, waves=run.waves,
            pictures=run.pictures, drive=run.drive,
        )
        options.update({k: v for k, v in overrides.items() if v is not None})
        return cls.make(config_path=config_path, **options)  # type: ignore[arg-type]
