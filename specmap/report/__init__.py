"""Figures and the PDF report, built only from the files of a result folder.

>>> from specmap.report import build_report     # doctest: +SKIP
>>> build_report("results/demo")                 # doctest: +SKIP
"""

from specmap.report.findings import findings
from specmap.report.load import load_results
from specmap.report.pdf import build_report

__all__ = ["build_report", "findings", "load_results"]
