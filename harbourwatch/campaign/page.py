"""The campaign's index page: a calendar of chunks, radar health, the combined alerts, filters.

Offline like the reports: one file, no request, the styles inlined. Every
user string (rule, zone and track ids, sensor ids, summaries, failure
reasons, file names) goes through :func:`harbourwatch.report._html.esc`.
The filter script only compares the text of table cells with the chosen
values; it never builds markup from them.
"""

from __future__ import annotations

import calendar
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from harbourwatch.io.atomic import atomic_write_text
from harbourwatch.report._assets import own_asset
from harbourwatch.report._html import esc
from harbourwatch.units import CAUTION, fmt_duration

__all__ = ["write_index", "index_html"]

_STYLE = """
.hw-cal{border-collapse:collapse;margin:0 0 1.2em 0}
.hw-cal th,.hw-cal td{border:1px solid #bbb;vertical-align:top;padding:3px 5px;min-width:7.5em}
.hw-cal td.hw-empty{background:#f4f4f4}
.hw-day{font-weight:bold}
.hw-chunk{display:block;margin:2px 0}
.hw-flag{color:#8a3b00;font-weight:bold}
.hw-failed{color:#8a0000;font-weight:bold}
.hw-filters label{margin-right:1em}
table.hw-list{border-collapse:collapse}
table.hw-list th,table.hw-list td{border-bottom:1px solid #ddd;padding:2px 6px;text-align:left}
"""

_FILTER_JS = """
(function(){
  var rows = Array.prototype.slice.call(document.querySelectorAll('#hw-alerts tbody tr'));
  var f = {rule: document.getElementById('hw-f-rule'), zone: document.getElementById('hw-f-zone'),
           text: document.getElementById('hw-f-text')};
  function apply(){
    var r = f.rule.value, z = f.zone.value, q = f.text.value.toLowerCase(), shown = 0;
    rows.forEach(function(tr){
      var ok = (!r || tr.cells[2].textContent === r) && (!z || tr.cells[6].textContent === z) &&
               (!q || tr.textContent.toLowerCase().indexOf(q) >= 0);
      tr.hidden = !ok; if (ok) { shown++; }
    });
    document.getElementById('hw-f-count').textContent = shown + ' of ' + rows.length + ' alerts shown';
  }
  f.rule.addEventListener('change', apply); f.zone.addEventListener('change', apply);
  f.text.addEventListener('input', apply); apply();
})();
"""


def _flags(health: Sequence[Mapping[str, Any]]) -> dict[str, list[str]]:
    out: dict[str, list[str]] = {}
    for h in health:
        if h.get("flags"):
            out.setdefault(str(h["chunk"]), []).append(f"{h['sensor']}: {h['flags']}")
    return out


def _calendar(runs: Sequence[Mapping[str, Any]], flags: Mapping[str, list[str]]) -> str:
    by_day: dict[str, list[Mapping[str, Any]]] = {}
    for r in runs:
        by_day.setdefault(str(r["start"])[:10], []).append(r)
    if not by_day:
        return "<p>No chunks.</p>"
    months = sorted({d[:7] for d in by_day})
    parts = []
    for ym in months:
        y, m = int(ym[:4]), int(ym[5:7])
        head = "".join(f"<th scope=\"col\">{d}</th>" for d in ("Mon", "Tue", "Wed", "Thu", "Fri",
                                                              "Sat", "Sun"))
        body = []
        for week in calendar.Calendar().monthdayscalendar(y, m):
            cells = []
            for d in week:
                key = f"{ym}-{d:02d}"
                if d == 0 or key not in by_day:
                    cells.append(f'<td class="hw-empty">{d or ""}</td>')
                    continue
                items = []
                for r in by_day[key]:
                    label = f"{str(r['start'])[11:16]} UTC"
                    if r["status"] == "failed":
                        items.append(f'<span class="hw-chunk hw-failed" title="{esc(r["reason"])}">'
                                     f"{esc(label)}: failed</span>")
                        continue
                    fl = flags.get(str(r["chunk"]), [])
                    flag = (f' <span class="hw-flag" title="{esc("; ".join(fl))}">health flag</span>'
                            if fl else "")
                    items.append(f'<a class="hw-chunk" href="{esc(r["report"])}">{esc(label)}: '
                                 f"{esc(r['alerts'])} alert{'s' if r['alerts'] != 1 else ''}</a>{flag}")
                cells.append(f'<td><span class="hw-day">{d}</span>{"".join(items)}</td>')
            body.append("<tr>" + "".join(cells) + "</tr>")
        parts.append(f'<table class="hw-cal"><caption>{esc(calendar.month_name[m])} {y}</caption>'
                     f"<thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>")
    return "\n".join(parts)


def _options(values: Sequence[str], ident: str, label: str) -> str:
    opts = "".join(f'<option value="{esc(v)}">{esc(v)}</option>' for v in sorted(set(values)) if v)
    return (f'<label for="{ident}">{esc(label)}</label> '
            f'<select id="{ident}"><option value="">all</option>{opts}</select>')


def _alerts(alerts: Sequence[Mapping[str, str]], runs: Sequence[Mapping[str, Any]]) -> str:
    report = {str(r["chunk"]): str(r["report"]) for r in runs}
    head = ("start", "end", "rule", "kind", "track", "other track", "zone", "probability",
            "chunk", "summary")
    rows = []
    for a in alerts:
        link = report.get(a.get("chunk", ""), "")
        chunk = (f'<a href="{esc(link)}">{esc(a.get("chunk", ""))}</a>' if link
                 else esc(a.get("chunk", "")))
        cells = [esc(a["start"]), esc(a["end"]), esc(a["rule"]), esc(a["kind"]), esc(a["track"]),
                 esc(a["other_track"]), esc(a["zone"]), esc(a["probability"]), chunk,
                 esc(a["summary"])]
        rows.append("<tr>" + "".join(f"<td>{c}</td>" for c in cells) + "</tr>")
    filters = ('<p class="hw-filters">'
               + _options([a["rule"] for a in alerts], "hw-f-rule", "rule") + " "
               + _options([a["zone"] for a in alerts], "hw-f-zone", "zone") + " "
               + '<label for="hw-f-text">contains</label> <input id="hw-f-text" type="search"> '
               + '<span id="hw-f-count" aria-live="polite"></span></p>')
    return (filters + '<table class="hw-list" id="hw-alerts"><thead><tr>'
            + "".join(f'<th scope="col">{esc(h)}</th>' for h in head)
            + "</tr></thead><tbody>" + "".join(rows) + "</tbody></table>")


def _health(health: Sequence[Mapping[str, Any]]) -> str:
    head = ("chunk", "sensor", "plots per scan", "clutter share", "outages", "outage time",
            "longest outage", "detection probability (est. / configured)", "flags")
    rows = []
    for h in health:
        pd = h["pd_estimated"]
        pd_txt = "n/a" if pd is None or pd != pd else f"{pd:.2f}"
        pps = h["plots_per_scan"]
        cs = h["clutter_share"]
        cells = [esc(h["chunk"]), esc(h["sensor"]),
                 "n/a" if pps is None or pps != pps else f"{pps:.1f}",
                 "n/a" if cs is None or cs != cs else f"{100 * cs:.0f} %",
                 esc(h["outages"]), esc(fmt_duration(60.0 * h["outage_min"])),
                 esc(fmt_duration(60.0 * h["longest_outage_min"])),
                 f"{pd_txt} / {h['pd_configured']:.2f}",
                 f'<span class="hw-flag">{esc(h["flags"])}</span>' if h["flags"] else ""]
        rows.append("<tr>" + "".join(f"<td>{c}</td>" for c in cells) + "</tr>")
    return ('<table class="hw-list" id="hw-health"><thead><tr>'
            + "".join(f'<th scope="col">{esc(x)}</th>' for x in head)
            + "</tr></thead><tbody>" + "".join(rows) + "</tbody></table>")


def index_html(*, runs: Sequence[Mapping[str, Any]], alerts: Sequence[Mapping[str, str]],
               health: Sequence[Mapping[str, Any]]) -> str:
    """The campaign index page (complete HTML text)."""
    failed = [r for r in runs if r["status"] == "failed"]
    fail_list = "".join(f"<li>{esc(r['chunk'])}: {esc(r['reason'])}</li>" for r in failed)
    span = f"{runs[0]['start']} to {runs[-1]['end']}" if runs else "no chunks"
    body = (
        f"<h1>Campaign: {esc(span)}</h1>\n"
        f"<p>{len(runs)} chunks, {len(failed)} failed, {len(alerts)} alerts.</p>\n"
        + (f'<h2>Failed chunks</h2><ul class="hw-failed">{fail_list}</ul>\n' if failed else "")
        + "<h2>Calendar of chunks</h2>\n" + _calendar(runs, _flags(health))
        + "\n<h2>Alerts</h2>\n" + _alerts(alerts, runs)
        + "\n<h2>Radar health</h2>\n" + _health(health)
    )
    return (
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
        f"<title>{esc('Campaign ' + span)}</title>\n"
        '<meta name="color-scheme" content="light">\n'
        f"<style>\n{own_asset('report.css')}{_STYLE}</style>\n</head>\n<body>\n"
        f'<p class="hw-caution" role="note" id="hw-caution">{esc(CAUTION)}</p>\n'
        f"<main>\n{body}\n</main>\n<script>{_FILTER_JS}</script>\n</body>\n</html>\n"
    )


def write_index(out_dir: Path, *, runs: Sequence[Mapping[str, Any]],
                alerts: Sequence[Mapping[str, str]], health: Sequence[Mapping[str, Any]]) -> Path:
    """Write ``index.html`` into the campaign folder (atomically)."""
    path = out_dir / "index.html"
    atomic_write_text(path, index_html(runs=runs, alerts=alerts, health=health))
    return path
