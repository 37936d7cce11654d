"""Figures and the self-contained HTML report of a geo3d run."""

from geo3d.report.html import build_report, write_report

__all__ = ["build_report", "write_report"]
