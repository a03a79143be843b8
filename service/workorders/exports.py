"""An order's lines as CSV, and the printable HTML page (escaped, inline print stylesheet)."""

from __future__ import annotations

import csv
import io
import re
from html import escape
from itertools import groupby

from service.workorders.models import WorkOrder, WorkOrderKind, WorkOrderLine

CSV_COLUMNS = (
    "work_order_id",
    "line_id",
    "fixture_id",
    "fixture_tag",
    "location",
    "lamp_type_code",
    "quantity",
    "position_nos",
    "position_ids",
    "outcome",
    "skip_reason",
)


def _safe_cell(value: str) -> str:
    # Spreadsheets run cells starting with these as formulas; a leading quote disarms them.
    return "'" + value if value[:1] in ("=", "+", "-", "@") else value


def lines_csv(order: WorkOrder, lines: list[WorkOrderLine]) -> str:
    """One CSV row per fixture line (positions joined by ';')."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(CSV_COLUMNS)
    for ln in lines:
        w.writerow(
            [
                order.id,
                ln.id,
                ln.fixture_id,
                _safe_cell(ln.fixture_tag),
                _safe_cell(ln.location or ""),
                _safe_cell(ln.lamp_type_code),
                ln.quantity,
                ";".join(str(n) for n in ln.position_nos),
                ";".join(str(n) for n in ln.position_ids),
                ln.outcome or "",
                _safe_cell(ln.skip_reason or ""),
            ]
        )
    return buf.getvalue()


STYLE = """
body{font:11pt/1.4 system-ui,sans-serif;margin:1.5rem;color:#111}
h1{font-size:1.4rem;margin:0 0 .3rem}
.cautions{border:2px solid #111;padding:.5rem .8rem;margin:.8rem 0}
.cautions h2{font-size:1rem;margin:.2rem 0}
dl.meta{display:grid;grid-template-columns:max-content 1fr;gap:.1rem 1rem;margin:.5rem 0}
dl.meta dt{font-weight:600}
table{border-collapse:collapse;width:100%;margin:.3rem 0 1rem}
th,td{border:1px solid #777;padding:.25rem .4rem;text-align:left;vertical-align:top}
h3{font-size:1rem;margin:1rem 0 .2rem}
.box{display:inline-block;width:.9em;height:.9em;border:1px solid #111;margin-right:.4em}
.sign{margin-top:1.5rem}
@media print{body{margin:0}section.location{break-inside:avoid}a{color:inherit}}
"""

KIND_LABEL: dict[str, str] = {
    WorkOrderKind.GROUP_RELAMP: "Group relamp",
    WorkOrderKind.SPOT_REPLACEMENT: "Spot replacement",
}


def _paragraphs(text: str) -> str:
    return "".join(f"<li>{escape(p)}</li>" for p in text.splitlines() if p.strip())


def natural_key(text: str) -> tuple[tuple[int, int | str], ...]:
    """Sort key that orders "can 2" before "can 10" (numbers compared as numbers)."""
    parts = re.split(r"(\d+)", text.casefold())
    return tuple((0, int(p)) if p.isdigit() else (1, p) for p in parts if p)


def _dark_flag(order: WorkOrder, ln: WorkOrderLine) -> str:
    """On a group order, mark fixtures with lamps already reported dark."""
    if order.kind != WorkOrderKind.GROUP_RELAMP or not ln.report_ids:
        return ""
    return f"<br><em>reported dark ({len(ln.report_ids)})</em>"


def _cover_notes(order: WorkOrder) -> list[str]:
    """Say which orders one visit answers, so no second crew is sent."""
    out = []
    if order.covered_by_order_id is not None:
        out.append(
            f'<p class="cover"><strong>Covered by group order {order.covered_by_order_id}:'
            "</strong> its crew replaces these lamps; do not send a separate crew.</p>"
        )
    covers = order.covers
    if covers:
        ids = ", ".join(str(i) for i in covers)
        out.append(
            f'<p class="cover"><strong>Covers spot order(s) {escape(ids)}:</strong> '
            "their reported-dark lamps are on this order; completing it settles them.</p>"
        )
    return out


def print_page(order: WorkOrder, lines: list[WorkOrderLine], site_name: str, area_name: str) -> str:
    """A printable page: cautions first, then fixtures grouped by location with checkboxes."""
    title = f"Work order {order.id}: {KIND_LABEL.get(order.kind, order.kind)}"
    meta = [
        ("Site", site_name),
        ("Area", area_name),
        ("State", order.state),
        ("Due", order.due_on.isoformat() if order.due_on else "not set"),
        ("Access", order.access_method),
        ("Lamps", str(order.lamp_quantity)),
        ("Estimated labour", f"{order.estimated_labour_h:g} h"),
        ("External reference", order.external_reference or ""),
    ]
    out = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{escape(title)}</title><style>{STYLE}</style></head><body>",
        f"<header><h1>{escape(title)}</h1></header>",
        '<section class="cautions" aria-labelledby="cautions"><h2 id="cautions">Safety cautions'
        f"</h2><ul>{_paragraphs(order.safety_cautions)}</ul></section>",
        '<dl class="meta">',
        *[f"<dt>{escape(k)}</dt><dd>{escape(v)}</dd>" for k, v in meta],
        "</dl>",
    ]
    out.extend(_cover_notes(order))
    if order.notes:
        out.append(f"<p><strong>Notes:</strong> {escape(order.notes)}</p>")
    out.append("<main>")
    # The walking order a technician expects: by location, then tag, numbers as numbers.
    ordered = sorted(
        lines, key=lambda ln: (natural_key(ln.location or ""), natural_key(ln.fixture_tag))
    )
    for loc, group in groupby(ordered, key=lambda ln: ln.location or "(no location given)"):
        out.append(f'<section class="location"><h3>{escape(loc)}</h3><table>')
        out.append(
            "<thead><tr><th>Fixture</th><th>Lamp type</th><th>Positions (tick when done)</th>"
            "<th>Skipped because</th></tr></thead><tbody>"
        )
        for ln in group:
            boxes = " ".join(
                f'<label><span class="box" role="checkbox" aria-checked="false"></span>'
                f"{escape(str(n))}</label>"
                for n in ln.position_nos
            )
            out.append(
                f"<tr><td>{escape(ln.fixture_tag)}{_dark_flag(order, ln)}</td>"
                f"<td>{escape(ln.lamp_type_code)}</td>"
                f"<td>{boxes}</td><td>{escape(ln.skip_reason or '')}</td></tr>"
            )
        out.append("</tbody></table></section>")
    out.append("</main>")
    out.append(
        '<section aria-labelledby="disposal"><h2 id="disposal">Disposal</h2>'
        f"<ul>{_paragraphs(order.disposal_instructions)}</ul></section>"
    )
    out.append('<p class="sign">Completed by: ____________________ Date: ____________</p>')
    out.append("</body></html>")
    return "\n".join(out)
