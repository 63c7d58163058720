"""Moved to modalnb.testing.bench (this alias is removed after the current refactor)."""

from .testing.bench import curve_fit_modes, fft_halfpower, format_bench, run_bench, write_bench_json

__all__ = ["run_bench", "format_bench", "write_bench_json", "fft_halfpower", "curve_fit_modes"]
