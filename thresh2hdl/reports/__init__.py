"""Reports: the build report as one record, and its JSON, HTML, Markdown and terminal forms.

assemble.py builds the record (record.py, design.py, sections.py) from the design, reading
the design's tables (tables.py); fields.py reads a loaded report.json back into it. html.py,
markdown.py and terminal.py write it, with the pictures of drawings.py and the phrases of
phrases.py.
"""

from .assemble import build_report, data_summary, guard_report, model_digest
from .design import (Comparison, Datapath, FeatureRow, Node, Sizes, SplitAdders, Stage,
                     UnitSizes)
from .html import report_html
from .markdown import report_markdown
from .phrases import cost_text
from .record import (REPORT_FORMAT, SAFETY_CAUTION, GuardSection, Report, Testbench,
                     Verification, WeightPort, report_json, report_record)
from .estimates import CostEstimate, estimates_of, store_estimate
from .sections import DataSummary, ProofSection
from .tables import argmax_report, level_names, node_table, stages_report, unit_histograms
from .terminal import summary_lines

__all__ = ["build_report", "data_summary", "guard_report", "model_digest", "report_html",
           "report_markdown", "REPORT_FORMAT", "SAFETY_CAUTION", "argmax_report", "cost_text",
           "level_names", "node_table", "report_json", "report_record", "stages_report",
           "store_estimate", "estimates_of", "summary_lines", "unit_histograms", "Report",
           "FeatureRow", "UnitSizes", "Sizes", "Stage", "Node", "Comparison", "SplitAdders",
           "Datapath", "WeightPort", "GuardSection", "Verification", "Testbench",
           "CostEstimate", "DataSummary", "ProofSection"]
