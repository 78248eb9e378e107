"""The display layer: text, markdown and HTML reports, their plots, the estimator audit
report and the sweep folder.

Reports render the results they are given and compute nothing; importing this package
registers the renderers that the results' ``to_text()`` / ``to_markdown()`` / ``to_html()``
use (:mod:`plantcore.core.rendering`).
"""

from plantcore.analysis.analyze import Analysis
from plantcore.analysis.report_contents import ReportContents
from plantcore.core.rendering import register_renderer
from plantcore.estimation.audit import ObservabilityAudit
from plantcore.reduction.equivalence import EquivalenceCertificate
from plantcore.structure.placement import PlacementSuggestion
from plantcore.reports.audit import audit_html, audit_text
from plantcore.reports.display import install_rich_display
from plantcore.reports.html import analysis_html, render_html, write_html_report
from plantcore.reports.plots import (
                                     plot_eigenvalue_map,
                                     plot_frequency_response,
                                     plot_hankel_singular_values,
)
from plantcore.reports.sweep_folder import plot_sweep_map
from plantcore.reports.placement_section import placement_markdown, placement_text
from plantcore.reports.text import analysis_markdown, analysis_text, certificate_text

register_renderer(Analysis, "text", analysis_text)
register_renderer(Analysis, "markdown", analysis_markdown)
register_renderer(Analysis, "html", analysis_html)
register_renderer(EquivalenceCertificate, "text", certificate_text)
register_renderer(ObservabilityAudit, "text", audit_text)
register_renderer(ObservabilityAudit, "html", audit_html)
register_renderer(PlacementSuggestion, "text", placement_text)
register_renderer(PlacementSuggestion, "markdown", placement_markdown)
# In a notebook, collected report contents show as the report itself (an embeddable fragment).
ReportContents._repr_html_ = lambda self: render_html(self, progress=False, fragment=True)

__all__ = ["analysis_html", "analysis_markdown", "analysis_text", "audit_html", "audit_text",
           "certificate_text", "install_rich_display", "plot_eigenvalue_map",
           "plot_frequency_response", "plot_hankel_singular_values", "plot_sweep_map",
           "render_html", "write_html_report"]
