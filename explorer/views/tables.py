"""Small HTML tables (served with the page: no table widget resources to fetch)."""

from __future__ import annotations

import html
import math
from collections.abc import Iterable, Mapping

__all__ = ["html_table", "key_value_table", "fmt_value"]


def fmt_value(value) -> str:
    """Short text for a table cell: 4 significant digits for floats, '-' for None/NaN.

    >>> fmt_value(0.000123456), fmt_value(None), fmt_value(float("nan")), fmt_value(True)
    ('0.0001235', '-', '-', 'yes')
    """
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:.4g}"
    if isinstance(value, (list, tuple)):
        return ", ".join(fmt_value(v) for v in value)
    return str(value)


def html_table(rows: Iterable[Mapping], columns: list[str] | None = None, css_class: str = "st-table") -> str:
    """Rows of dicts as an HTML table (columns: the first row's keys unless given).

    >>> html_table([{"a": 1, "b": 2.5}])
    '<table class="st-table"><thead><tr><th>a</th><th>b</th></tr></thead><tbody><tr><td>1</td><td>2.5</td></tr></tbody></table>'
    """
    rows = list(rows)
    if not rows:
        return '<p class="st-muted">None.</p>'
    columns = columns or list(rows[0])
    head = "".join(f"<th>{html.escape(str(c))}</th>" for c in columns)
    body = "".join("<tr>" + "".join(f"<td>{html.escape(fmt_value(r.get(c)))}</td>" for c in columns) + "</tr>"
                   for r in rows)
    return f'<table class="{css_class}"><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>'


def key_value_table(pairs: Iterable[tuple[str, object]], css_class: str = "st-table st-kv") -> str:
    """(label, value) pairs as a two-column HTML table."""
    body = "".join(f"<tr><th>{html.escape(str(k))}</th><td>{html.escape(fmt_value(v))}</td></tr>"
                   for k, v in pairs)
    return f'<table class="{css_class}"><tbody>{body}</tbody></table>'
