"""HDL text from the Jinja2 templates in ``vkit/sim/templates`` (the generators keep no HDL in Python)."""

from __future__ import annotations

from functools import lru_cache
from typing import Any

import jinja2

__all__ = ["render"]


@lru_cache(maxsize=1)
def _environment() -> jinja2.Environment:
    # HDL is not HTML: no escaping. Block tags on their own line leave no trace in the output, and a
    # missing context value is an error rather than an empty string in the HDL.
    return jinja2.Environment(
        loader=jinja2.PackageLoader("vkit.sim", "templates"),
        autoescape=False,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
        undefined=jinja2.StrictUndefined,
        # compiled templates kept in the user's temp folder: every build and case process renders a harness
        bytecode_cache=jinja2.FileSystemBytecodeCache(),
    )


def render(template: str, **context: Any) -> str:
    """The text of ``template`` (a file name in ``vkit/sim/templates``) with ``context`` filled in."""
    return _environment().get_template(template).render(**context)
