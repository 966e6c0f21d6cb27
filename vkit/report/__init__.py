"""What a run leaves for people and CI: PNGs, report.json, JUnit XML, the summary, shard merges."""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

_HOME = {
    "MISSING_COLOUR": "vkit.report.writers",
    "UNCHECKED_COLOUR": "vkit.report.writers",
    "XZ_COLOUR": "vkit.report.writers",
    "case_entry": "vkit.report.writers",
    "case_folder": "vkit.report.writers",
    "format_summary": "vkit.report.writers",
    "merge_reports": "vkit.report.writers",
    "read_images": "vkit.report.quality",
    "safe_name": "vkit.report.writers",
    "write_case_report": "vkit.report.writers",
    "write_model_report": "vkit.report.quality",
    "write_run_report": "vkit.report.writers",
}
__all__ = sorted(_HOME)
__getattr__, __dir__ = lazy_facade(__name__, _HOME)
