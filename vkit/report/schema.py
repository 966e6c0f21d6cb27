"""The report.json format as a JSON Schema shipped with vkit, and the check every reader of a report runs."""

from __future__ import annotations

import json
from functools import lru_cache
from importlib import resources
from typing import Any

from vkit.core.errors import ConfigError

__all__ = ["report_schema", "check_report"]


@lru_cache(maxsize=1)
def report_schema() -> dict[str, Any]:
    """The JSON Schema of ``report.json`` (``vkit/report/report.schema.json``)."""
    return json.loads(resources.files("vkit.report").joinpath("report.schema.json").read_text(encoding="utf-8"))


def _where(path: Any) -> str:
    parts = [f"[{p}]" if isinstance(p, int) else f".{p}" for p in path]
    return "report" + "".join(parts)


def check_report(body: Any, source: str) -> None:
    """Raise one ConfigError line when ``body`` (read from ``source``) is not a vkit report.

    The line names the first problem the schema finds, where it is, and the fix.
    """
    import jsonschema  # a dependency of vkit; imported here so that runs that never read a report skip it

    validator = jsonschema.Draft202012Validator(report_schema())
    error = jsonschema.exceptions.best_match(validator.iter_errors(body))
    if error is not None:
        raise ConfigError(
            f"{source}: not a vkit report: {_where(error.absolute_path)}: {error.message}; "
            "pass the report.json that a vkit run or vkit merge wrote"
        )
