"""How result objects reach the display layer without importing it.

Numerical results (an :class:`~plantcore.analysis.analyze.Analysis`, an equivalence
certificate, an observability audit) offer ``to_text()`` and ``to_html()``, but the code that
renders them lives in :mod:`plantcore.reports`, a layer *above* the numerics.  So that the
imports only point down, the reports register their renderers here when they are imported
(``import plantcore`` imports them), and a result's ``to_text()`` asks this registry.  The
numerical modules never import a display module, and a renderer only reads the result it is
given (it never computes).

This is the plug-in pattern of a registry keyed by result type and form (common practice).
"""

from __future__ import annotations

from collections.abc import Callable

_RENDERERS: dict[tuple[type, str], Callable] = {}


def register_renderer(result_type: type, form: str, renderer: Callable) -> None:
    """Make ``renderer(result, **options)`` the ``form`` ("text", "markdown", "html")
    rendering of ``result_type`` (and of its subclasses)."""
    _RENDERERS[(result_type, form)] = renderer


def render(result, form: str, **options) -> str:
    """Render ``result`` in ``form`` with the renderer registered for its type.

    Raises
    ------
    NotImplementedError
        When no renderer of that form is registered for the result's type (the reports
        layer registers them when ``plantcore`` is imported).
    """
    for cls in type(result).__mro__:
        renderer = _RENDERERS.get((cls, form))
        if renderer is not None:
            return renderer(result, **options)
    raise NotImplementedError(f"no {form} rendering is registered for "
                              f"{type(result).__name__}; import plantcore (which loads its "
                              f"reports) before asking for one.")
