"""The error types vkit raises, each tied to an exit code of the command line."""

from __future__ import annotations

__all__ = ["VkitError", "ConfigError", "ToolError", "DutError", "EXIT_PASS", "EXIT_DUT", "EXIT_CONFIG"]

EXIT_PASS = 0
"""Every case passed."""
EXIT_DUT = 1
"""At least one case failed because of what the design did."""
EXIT_CONFIG = 2
"""The configuration, an input file or a tool is wrong; nothing could be judged."""


class VkitError(Exception):
    """Base class. The message is one line: the thing, the value seen, the value expected, the fix."""

    exit_code: int = EXIT_CONFIG


class ConfigError(VkitError):
    """A configuration, spec, image or command-line value is wrong (exit code 2)."""

    exit_code = EXIT_CONFIG


class ToolError(VkitError):
    """A simulator is missing, fails to build the sources, or crashes (exit code 2)."""

    exit_code = EXIT_CONFIG


class DutError(VkitError):
    """The design under test broke the interface so badly that no frame could be scored (exit code 1)."""

    exit_code = EXIT_DUT
