"""What a run leaves for people and CI: PNGs, report.json, JUnit XML, the summary, shard merges."""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

__getattr__, __dir__, __all__ = lazy_facade(__name__, {
    "vkit.report.page": "render_index render_model_page write_index write_model_page",
    "vkit.report.progress": "Progress",
    "vkit.report.schema": "check_report report_schema",
    "vkit.report.quality": "read_images write_model_report",
    "vkit.report.writers": (
        "case_entry case_folder format_summary merge_reports MISSING_COLOUR "
        "safe_name UNCHECKED_COLOUR write_case_report write_run_report XZ_COLOUR"
    ),
})
