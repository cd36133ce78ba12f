"""Export: tables (LaTeX, Markdown, CSV, HTML), provenance, the HTML report and the summary folder."""
from ..core.files import refuse_existing, write_atomic
from .folder import FIGURE_FORMATS, check_output_folder, write_summary_folder
from .layout import escape_latex, rule_to_latex, rule_to_text
from .provenance import hash_array, hash_file, provenance, provenance_lines
from .report import CAUTIONS, render_report, write_report
from .tables import (FORMATS, curve_points, export_tables, summary_tables, to_csv, to_html, to_latex, to_markdown,
                     write_provenance)

__all__ = [
    "write_atomic", "refuse_existing", "escape_latex", "rule_to_latex", "rule_to_text",
    "to_latex", "to_markdown", "to_csv", "to_html", "curve_points",
    "provenance", "provenance_lines", "hash_array", "hash_file", "write_provenance",
    "summary_tables", "export_tables", "FORMATS",
    "render_report", "write_report", "CAUTIONS",
    "write_summary_folder", "check_output_folder", "FIGURE_FORMATS",
]
