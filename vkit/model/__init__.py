"""The bit-exact model of a 3x3 filter pipeline, its float twin, word widths, tables and quality figures (never imports cocotb)."""

from __future__ import annotations

from vkit.core.lazy import lazy_facade

__getattr__, __dir__, __all__ = lazy_facade(__name__, {
    "vkit.model.exact": "run_model run_model_frames",
    "vkit.model.fixedpoint": "bits_for_range check_rounding ROUNDING saturate shift_round",
    "vkit.model.float_twin": "run_float",
    "vkit.model.kernels": (
        "check_kernel correlate3x3 correlate_padded Kernel kernel_range KERNELS "
        "maximum3x3 median3x3 minimum3x3"
    ),
    "vkit.model.luma": (
        "BT601 BT709 luma luma_float luma_range LumaWeights OPENCV PRESETS "
        "weights_from_coefficients"
    ),
    "vkit.model.lut": (
        "read_readmemb read_readmemh table_from_function write_readmemb write_readmemh "
        "write_vhdl_package"
    ),
    "vkit.model.magnitude": (
        "isqrt magnitude_abs_sum magnitude_exact magnitude_float "
        "magnitude_max_min_half magnitude_table METHODS root_table sum_of_squares "
        "table_address table_dtype"
    ),
    "vkit.model.presets": "preset SPECS_DIR",
    "vkit.model.quality": (
        "compare compare_runs ImageQuality ImageRun psnr_db QualityReport "
        "StageCoverage"
    ),
    "vkit.model.result": "ModelResult Stage",
    "vkit.model.spec": (
        "FILTER_KINDS FilterSpec GRADIENT_KINDS INPUTS LumaSpec MAGNITUDE_METHODS "
        "MagnitudeSpec ORDER_KINDS OutputSpec PipelineSpec WindowSpec"
    ),
    "vkit.model.ycbcr": "rgb_to_ycbcr rgb_to_ycbcr_float YCbCrCoding ycbcr_to_rgb ycbcr_to_rgb_float",
    "vkit.model.widths": (
        "dtype_for_range format_width_table stage_range_map stage_ranges StageWidth "
        "widths_to_dict"
    ),
    "vkit.model.window": (
        "BORDERS check_border interior_mask OPENCV_BORDERS pad ring_mask SCIPY_MODES taps "
        "taps_of_padded"
    ),
})
