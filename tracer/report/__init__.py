"""Static report pages (``tracer report``): a render, a dataset, or a dataset's scores, as a folder
that opens from ``file://`` with no server (README, "Report pages")."""

from .build import ReportSummary, write_report

__all__ = ["ReportSummary", "write_report"]
