"""Configs, the case matrix, builds and workers, export/replay and the scaffold."""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

__getattr__, __dir__, __all__ = lazy_facade(__name__, {
    "vkit.run.builds": "build_design build_fast_design build_request",
    "vkit.run.case": "rerun_command run_one_case",
    "vkit.run.config": (
        "Case Config config_from_dict DesignConfig expand_matrix Flow load_config "
        "parse_shard PatternEntry read_toml RunSettings select_cases shard_cases "
        "StimulusConfig"
    ),
    "vkit.run.export": (
        "capture_meta_for_case export_case ExportResult read_capture "
        "score_capture_file"
    ),
    "vkit.run.inputs": "check_ports make_frames make_sim_case",
    "vkit.run.options": "RunOptions",
    "vkit.run.pool": "run_cases",
    "vkit.run.pytest_plugin": (
        "pytest_addoption pytest_collect_file pytest_configure "
        "pytest_sessionfinish VkitCaseError VkitCaseFailed VkitCaseItem "
        "VkitConfigFile"
    ),
    "vkit.run.results": "CaseResult exit_code_for RunResult",
    "vkit.run.runner": "merge run",
    "vkit.run.scaffold": (
        "CONFIG_NAME guess_roles guess_spec MAKEFILE_NAME parse_assignments "
        "RoleGuess scaffold ScaffoldResult"
    ),
    "vkit.run.vectors": "export_vectors ExportedCase replay",
    "vkit.run.waves": "wave_window",
})
