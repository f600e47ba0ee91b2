"""Reports: the build report and its JSON, HTML, Markdown and terminal forms."""

from .html import report_html, report_markdown
from .report import (REPORT_FORMAT, SAFETY_CAUTION, argmax_report, cost_text, level_names,
                     node_table, read_build_settings, read_history, report_json, stages_report,
                     store_estimate, summary_lines, unit_histograms)

__all__ = ["report_html", "report_markdown", "REPORT_FORMAT", "SAFETY_CAUTION", "argmax_report",
           "cost_text", "level_names", "node_table", "read_build_settings", "read_history",
           "report_json", "stages_report", "store_estimate", "summary_lines", "unit_histograms"]
