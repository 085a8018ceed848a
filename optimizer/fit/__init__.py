"""Fitting line models to logs: electric relations, thermal parameters, validation, drift."""

from .data import Observations, build_observations, find_lots, line_record
from .report import DEFAULTS, LineFitReport, ProductFit, fit_line

__all__ = ["DEFAULTS", "LineFitReport", "Observations", "ProductFit", "build_observations", "find_lots",
           "fit_line", "line_record"]
