"""Reports: the build report and its JSON, HTML, Markdown and terminal forms."""

from .assemble import build_report, data_summary, guard_report, model_digest
from .html import report_html, report_markdown
from .report import (REPORT_FORMAT, SAFETY_CAUTION, argmax_report, cost_text, level_names,
                     node_table, report_json, stages_report, store_estimate, summary_lines,
                     unit_histograms)

__all__ = ["build_report", "data_summary", "guard_report", "model_digest", "report_html",
           "report_markdown", "REPORT_FORMAT", "SAFETY_CAUTION", "argmax_report", "cost_text",
           "level_names", "node_table", "report_json", "stages_report", "store_estimate",
           "summary_lines", "unit_histograms"]
