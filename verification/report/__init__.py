"""Reports of studies and of the verification suite: HTML, Markdown, JSON, plots, progress."""

from .progress import ProgressBar
from .write import write_gci_report, write_study_report, write_verify_report

__all__ = ["ProgressBar", "write_gci_report", "write_study_report", "write_verify_report"]
