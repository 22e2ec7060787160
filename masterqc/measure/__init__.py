"""Measuring: streaming analyzers fed by one engine from a single read of the file."""

from masterqc.measure.engine import measure_file, run_analyzers
from masterqc.measure.options import MeasureOptions

__all__ = ["MeasureOptions", "measure_file", "run_analyzers"]
