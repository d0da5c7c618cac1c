"""Reports of kinroots output folders: Markdown, self-contained HTML and LaTeX tables.

Layer: above ``plots/`` (it redraws figures from the tables), below ``cli/``.  It reads
a folder and never recomputes a root.
"""

from kinroots.report.document import Report, build_report, write_report
from kinroots.report.folder import ReportError, read_folder

__all__ = ["Report", "ReportError", "build_report", "read_folder", "write_report"]
