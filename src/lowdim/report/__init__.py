"""Every output of a results folder, rendered from the analysis engine's results object."""

from lowdim.report.build import build_report

__all__ = ["build_report"]
