"""The look shared by every HTML report: one style sheet, the page shell, the fragment shell,
and the number formatting of HTML tables.

Every rule of the style sheet is scoped to the ``plantcore-report`` class, so the same
markup can stand as a whole page (:func:`html_page`) or be embedded in a notebook or
another page (:func:`html_fragment`) without restyling its host.  No rule loads anything
from a network (no web fonts, no images by address).

Layout choices that a browser test checks (``tests/test_report_browser.py``):

* the contents bar wraps (its links are separated by whitespace and may break between
  words), so it never overflows at 1,280 or 800 px;
* wide tables scroll inside their own box (``div.table-wrap``) instead of widening the page;
* numbers never wrap mid-value (``.n``, ``.num``: ``white-space: nowrap``);
* in print the contents bar is hidden, sections may break across pages (a whole section
  kept on one page left pages nearly empty) but a figure never parts from its caption, a
  heading never ends a page, and collapsed tables stay collapsed.
"""

from __future__ import annotations

import html

from plantcore.core.wording import special_number

__all__ = [
    "REPORT_CLASS",
    "REPORT_CSS",
    "escape",
    "html_fragment",
    "html_number",
    "html_page",
]

#: The class of the element that holds a report (page or fragment); every style rule is
#: scoped to it.
REPORT_CLASS = "plantcore-report"

_R = "." + REPORT_CLASS

REPORT_CSS = f"""
{_R} {{ --ink:#1f2328; --muted:#5b5f66; --rule:#d9d4c7; --paper:#fffdf8; --band:#f3efe4;
        --slate:#2c5d8a; --ochre:#c98a1b; --brick:#a3362c; --stone:#6f6a62;
        --good:#2f6b3a; --good-bg:#e6f0e2; --warn:#8a4b08; --warn-bg:#fbecd6;
        color:var(--ink); background:var(--paper);
        font: 15px/1.5 "Segoe UI", "DejaVu Sans", "Helvetica Neue", Arial, sans-serif;
        max-width: 62rem; margin: 0 auto; padding: 1.2rem 1.6rem 3rem; }}
{_R} * {{ box-sizing: border-box; }}
{_R} header.report-head {{ border-left: 0.55rem solid var(--slate); background: var(--band);
       padding: 0.9rem 1.2rem; margin: 0 0 1.2rem; }}
{_R} header.report-head h1 {{ margin: 0 0 0.2rem; font-size: 1.55rem; font-weight: 600; }}
{_R} header.report-head p {{ margin: 0.1rem 0; color: var(--muted); }}
{_R} nav.contents {{ font-size: 0.9rem; margin: 0 0 1.4rem; color: var(--muted);
       display: flex; flex-wrap: wrap; gap: 0.15rem 0.9rem; }}
{_R} nav.contents a {{ color: var(--slate); text-decoration: none; }}
{_R} section {{ margin: 0 0 2rem; scroll-margin-top: 0.5rem; }}
{_R} h2 {{ font-size: 1.2rem; font-weight: 600; border-bottom: 2px solid var(--rule);
     padding-bottom: 0.2rem; margin: 0 0 0.7rem; }}
{_R} h2 .num {{ color: var(--slate); margin-right: 0.4rem; }}
{_R} h3 {{ font-size: 1rem; font-weight: 600; margin: 0.9rem 0 0.3rem; }}
{_R} p.lead {{ color: var(--muted); margin-top: 0; }}
{_R} div.table-wrap {{ max-width: 100%; overflow-x: auto; }}
{_R} div.table-wrap.tall {{ max-height: 36rem; overflow-y: auto; }}
{_R} div.table-wrap.tall thead th {{ position: sticky; top: 0; z-index: 1; }}
{_R} table {{ border-collapse: collapse; width: 100%; font-size: 0.9rem; margin: 0.4rem 0 0.8rem; }}
{_R} th, {_R} td {{ text-align: left; padding: 0.28rem 0.55rem;
         border-bottom: 1px solid var(--rule); vertical-align: top; }}
{_R} th {{ background: var(--band); font-weight: 600; }}
{_R} td.n, {_R} .num {{ text-align: right; font-variant-numeric: tabular-nums;
         white-space: nowrap; }}
{_R} tbody tr:nth-child(even) td {{ background: #faf7f0; }}
{_R} .tiles {{ display: grid; grid-template-columns: repeat(auto-fill, minmax(13.5rem, 1fr));
         gap: 0.7rem; }}
{_R} .tile {{ border: 1px solid var(--rule); border-top: 0.35rem solid var(--stone);
        padding: 0.55rem 0.75rem; background: #fff; }}
{_R} .tile.good {{ border-top-color: var(--good); }}
{_R} .tile.warn {{ border-top-color: var(--warn); }}
{_R} .tile .q {{ font-size: 0.82rem; color: var(--muted); text-transform: uppercase;
           letter-spacing: 0.04em; }}
{_R} .tile .a {{ font-size: 1.25rem; font-weight: 600; }}
{_R} .tile.good .a {{ color: var(--good); }}
{_R} .tile.warn .a {{ color: var(--warn); }}
{_R} .tile .why {{ font-size: 0.85rem; color: var(--muted); }}
{_R} .stack {{ display: flex; height: 1.6rem; border: 1px solid var(--rule);
         margin: 0.3rem 0 0.6rem; }}
{_R} .stack span {{ display: block; height: 100%; color: #fff; font-size: 0.8rem;
              line-height: 1.6rem; text-align: center; overflow: hidden; }}
{_R} .swatch {{ display: inline-block; width: 0.8rem; height: 0.8rem; margin-right: 0.35rem;
          vertical-align: -0.05rem; }}
{_R} .p1 {{ background: var(--slate); }} {_R} .p2 {{ background: var(--ochre); }}
{_R} .p3 {{ background: var(--brick); }} {_R} .p4 {{ background: var(--stone); }}
{_R} .bar {{ display: inline-block; height: 0.6rem; background: var(--slate);
       vertical-align: middle; }}
{_R} .bar.fragile {{ background: var(--brick); }}
{_R} .flag {{ color: var(--warn); font-weight: 600; white-space: nowrap; }}
{_R} .ok {{ color: var(--good); font-weight: 600; }}
{_R} .verdict {{ border-left: 0.4rem solid var(--slate); background: var(--band);
       padding: 0.6rem 0.9rem; font-weight: 600; }}
{_R} .verdict.seen {{ border-left-color: var(--brick); background: #fbf1ee; color: var(--brick); }}
{_R} figure {{ margin: 0.4rem 0 0.8rem; }}
{_R} figure img {{ max-width: 100%; height: auto; border: 1px solid var(--rule);
       background: #fff; }}
{_R} figcaption {{ font-size: 0.85rem; color: var(--muted); }}
{_R} pre {{ background: var(--band); padding: 0.7rem 0.9rem; overflow-x: auto;
       font-size: 0.82rem; line-height: 1.4; white-space: pre-wrap; }}
{_R} code, {_R} pre, {_R} .mono {{
       font-family: "DejaVu Sans Mono", Consolas, "Liberation Mono", monospace; }}
{_R} code {{ overflow-wrap: anywhere; }}
{_R} ul.names {{ columns: 2; font-size: 0.88rem; padding-left: 1.1rem; }}
{_R} details {{ margin: 0.3rem 0 0.6rem; }}
{_R} details summary {{ cursor: pointer; color: var(--slate); }}
{_R} div.alert {{ border: 2px solid var(--brick); background: #fbf1ee; padding: 0.6rem 0.9rem;
            margin: 0 0 1.2rem; font-weight: 600; color: var(--brick); }}
{_R} section#caution {{ border: 2px solid var(--brick); background: #fbf1ee;
            padding: 0.8rem 1rem; }}
{_R} section#caution h2 {{ border: none; color: var(--brick); }}
{_R} footer {{ color: var(--muted); font-size: 0.8rem; border-top: 1px solid var(--rule);
         padding-top: 0.5rem; }}
@media (max-width: 700px) {{ {_R} {{ padding: 0.8rem 0.8rem 2rem; }}
                             {_R} ul.names {{ columns: 1; }} }}
@media print {{
  {_R} {{ background: #fff; font-size: 10.5pt; max-width: none; padding: 0; }}
  {_R} nav.contents {{ display: none; }}
  {_R} figure, {_R} .tile, {_R} tr, {_R} .verdict, {_R} div.alert {{ break-inside: avoid; }}
  {_R} figure img {{ max-height: 17cm; width: auto; }}
  {_R} h2, {_R} h3, {_R} p.lead {{ break-after: avoid; }}
  {_R} div.table-wrap, {_R} div.table-wrap.tall {{ max-height: none; overflow: visible; }}
  {_R} .tile, {_R} header.report-head, {_R} .stack span, {_R} .bar, {_R} .swatch,
  {_R} section#caution {{ -webkit-print-color-adjust: exact; print-color-adjust: exact; }}
  {_R} a {{ color: inherit; text-decoration: none; }}
}}
"""

_PAGE_CSS = "body { margin: 0; background: #fffdf8; }\n"


def escape(value) -> str:
    """HTML-escaped text (quotes too)."""
    return html.escape(str(value), quote=True)


def html_page(title: str, body: str) -> str:
    """A complete, self-contained HTML document holding ``body`` in the report's style."""
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
            f"<title>{escape(title)}</title>\n<style>{_PAGE_CSS}{REPORT_CSS}</style>\n</head>\n"
            f"<body>\n<main class=\"{REPORT_CLASS}\">\n{body}\n</main>\n</body>\n</html>\n")


def html_fragment(body: str) -> str:
    """``body`` in the report's style as one ``<div>`` to embed in a page or notebook: its
    style sheet is scoped to the report, so the host page keeps its own look."""
    return (f"<div class=\"{REPORT_CLASS}\">\n<style>{REPORT_CSS}</style>\n{body}\n</div>\n")


def html_number(x, digits: int = 3) -> str:
    """A number for an HTML table: ``&ndash;`` for None or NaN, ``&infin;``, powers of ten
    written as ``2.5&times;10<sup>-3</sup>``, true minus signs."""
    word = special_number(x, missing="&ndash;", infinite="&infin;",
                          negative_infinite="&minus;&infin;")
    if word is not None:
        return word
    x = float(x)
    text = f"{x:.{digits}g}"
    if "e" in text:
        mant, exp = text.split("e")
        mant = mant.replace("-", "&minus;")
        return f"{mant}&times;10<sup>{int(exp)}</sup>".replace("<sup>-", "<sup>&minus;")
    return text.replace("-", "&minus;")
