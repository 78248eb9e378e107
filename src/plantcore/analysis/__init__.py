"""Layer 3, the whole diagnosis of one model: :func:`analyze` and what a report shows
(:func:`collect_report`).

Imports the core, structure and reduction layers; the reports render what it returns.
"""

from plantcore.analysis.analyze import Analysis, analyze
from plantcore.analysis.report_contents import (
                                                DEFAULT_RELATIVE_ERROR,
                                                ReportContents,
                                                SampledResponse,
                                                collect_report,
)

__all__ = ["Analysis", "DEFAULT_RELATIVE_ERROR", "ReportContents", "SampledResponse", "analyze",
           "collect_report"]
