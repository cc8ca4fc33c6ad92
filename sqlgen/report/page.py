"""The report page: sections of charts chosen from the spec and the rows, one HTML file
that opens offline (every script embedded), and one PNG per chart.
"""

from __future__ import annotations

import datetime as dt
import functools
import html
import json
import os
from dataclasses import dataclass
from pathlib import Path

from .. import __version__
from ..comments import printable
from ..errors import OutputError
from ..spec import Spec
from ..views import VIEWS_BY_NAME
from . import charts as c
from .run import Rows

PERSONAL = tuple(v.name for v in VIEWS_BY_NAME.values() if v.personal_data)


@dataclass(frozen=True)
class Report:
    html: Path
    pngs: tuple[Path, ...]
    sections: tuple[c.Section, ...]


def _name(spec: Spec, source) -> str:
    return ".".join(part for part, _quoted in source.table)


def _in_progress(rows: Rows) -> str | None:
    last = rows.records()[-1:] if rows.rows else []
    return last[0]["period_start"] if last and last[0]["period_status"] == "in_progress" else None


def _one_period(rows: Rows, what: str) -> str:
    row = rows.records()[0]
    status = " (still in progress)" if row["period_status"] == "in_progress" else ""
    return (f"Only one period of {what} so far, starting {row['period_start']}{status}: a "
            "chart of change over time needs at least two periods. Its numbers are in the "
            "table below.")


def _empty(table: str, summary: Rows | None, counts: tuple[str, ...]) -> str:
    if summary is None or not summary.rows:
        return f"No rows to chart: {table} gave no counted rows."
    row = summary.records()[0]
    left = ", ".join(f"{row[name]:,} {name.removesuffix('_rows').replace('_', ' ')}"
                     for name in counts if row.get(name))
    return (f"No rows to chart: {table} has {row['source_rows']:,} rows and none of them "
            "counted" + (f" (left out: {left})" if left else "") + ". Check the table, "
            "the spec's `where` and its valid time range.")


def _activity_sections(spec: Spec, found: dict[str, Rows]) -> list[c.Section]:
    table = _name(spec, spec.activity)
    ga = found["growth_accounting"]
    if not ga.rows:
        message = _empty(table, found.get("activity_source_summary"),
                         ("null_user_rows", "null_timestamp_rows", "filtered_out_rows",
                          "out_of_range_rows", "unconverted_rows"))
        return [c.Section("Active users", messages=(message,))]
    grain = spec.grain
    if len(ga.rows) == 1:
        users = c.growth_users(ga, grain)
        sections = [c.Section("Active users", (_table_only(users),),
                              (_one_period(ga, "activity"),))]
    else:
        sections = [c.Section("Active users", (c.growth_users(ga, grain), c.net_change(ga, grain))),
                    c.Section("Quick ratio and retention", (c.quick_ratio(ga, grain),
                                                            c.rates(ga, grain)))]
    flagged = _in_progress(ga)
    splits = [segment for segment in spec.segments if segment.splits_activity]
    split = found.get("growth_accounting_by_segment")
    if splits and split is not None and len(ga.rows) > 1:
        sections.append(c.Section("Segments", tuple(
            c.segment_users(split, grain, segment.name, segment.kind) for segment in splits
            if any(d["segment"] == segment.name for d in split.records()))))
    if not spec.cohorts:
        sections.append(c.Section("Cohorts", messages=(
            "No cohort heat map: the spec does not set `cohorts: true` "
            "(docs/cohorts.md).",)))
    elif len(ga.rows) == 1:
        sections.append(c.Section("Cohorts", messages=(
            "No cohort heat map: one period gives one cohort at age 0 (100%).",)))
    else:
        sections.append(c.Section("Cohorts", (c.cohorts(found["cohort_retention"], grain,
                                                        flagged),)))
    if spec.engagement:
        sections.append(c.Section("Engagement depth", (c.engagement(
            found["engagement_depth"], grain, flagged),)))
    else:
        sections.append(c.Section("Engagement depth", messages=(
            "No engagement chart: the spec does not set `engagement: true`.",)))
    if spec.trailing_windows:
        rows = found["trailing_activity"]
        if len({r["day"] for r in rows.records()}) < 2:
            sections.append(c.Section("Trailing windows", messages=(
                "No trailing-window chart: activity covers a single day.",)))
        else:
            sections.append(c.Section("Trailing windows", tuple(c.trailing(rows))))
    else:
        sections.append(c.Section("Trailing windows", messages=(
            "No trailing-window chart: the spec sets no `trailing_windows`.",)))
    return sections


def _revenue_sections(spec: Spec, found: dict[str, Rows]) -> list[c.Section]:
    if spec.revenue is None:
        return [c.Section("Revenue", messages=(
            "No revenue charts: the spec has no `revenue` section. Add one to chart "
            "recurring revenue (docs/revenue.md).",))]
    ra = found["revenue_accounting"]
    table = _name(spec, spec.revenue)
    if not ra.rows:
        return [c.Section("Revenue", messages=(_empty(
            table, found.get("revenue_source_summary"),
            ("null_customer_rows", "null_date_rows", "null_amount_rows", "filtered_out_rows",
             "out_of_range_rows", "invalid_rows")),))]
    if len(ra.rows) == 1:
        return [c.Section("Revenue", (_table_only(c.revenue(ra, spec.grain)),),
                          (_one_period(ra, "revenue"),))]
    sections = [c.Section("Revenue", (c.revenue(ra, spec.grain),
                                      c.revenue_retention(ra, spec.grain)))]
    if spec.cohorts:
        sections.append(c.Section("Revenue cohorts", (c.revenue_cohorts(
            found["revenue_cohorts"], spec.grain, _in_progress(ra)),)))
    return sections


def _table_only(chart: c.Chart) -> c.Chart:
    return c.Chart(chart.key, chart.title, chart.description, {}, chart.rows, chart.table)


def sections(spec: Spec, found: dict[str, Rows]) -> list[c.Section]:
    """The page's sections, each with its charts or the message that replaces them."""
    out: list[c.Section] = []
    if spec.activity is not None:
        out += _activity_sections(spec, found)
    out += _revenue_sections(spec, found)
    return out


# ---------------------------------------------------------------- HTML

def _cell(value: object, kind: str) -> str:
    if value is None:
        return "—"
    if kind == "text":
        return html.escape(str(value))
    if kind == "signed":
        return f"{value:+,}"
    if kind == "money":
        return f"{value:,.2f}"
    if kind == "ratio":
        return f"{value:,.2f}"
    if kind == "share":
        return f"{value:.1%}"
    return f"{value:,}"


def _table(chart: c.Chart) -> str:
    head = "".join(f'<th scope="col" class="{"t" if col.kind == "text" else "n"}">'
                   f"{html.escape(col.title)}</th>" for col in chart.table)
    body = "\n".join(
        "<tr>" + "".join(f'<td class="{"t" if col.kind == "text" else "n"}">'
                         f"{_cell(row.get(col.name), col.kind)}</td>" for col in chart.table)
        + "</tr>" for row in chart.rows.records())
    count = len(chart.rows.rows)
    return (f'<details class="numbers"{" open" if not chart.spec else ""}>'
            f"<summary>Numbers behind the chart ({count:,} rows of "
            f"<code>{chart.rows.view}</code>)</summary>\n"
            f'<div class="scroll"><table><thead><tr>{head}</tr></thead>\n<tbody>\n{body}\n'
            "</tbody></table></div></details>")


def _chart(chart: c.Chart, png: str | None) -> str:
    figure = (f'<div class="chart" id="chart-{chart.key}" role="img" '
              f'aria-label="{html.escape(chart.title)}"></div>' if chart.spec else "")
    link = (f'<p class="png">PNG for documents: <a href="{html.escape(png)}">'
            f"{html.escape(png)}</a></p>" if png else "")
    heading = "" if chart.spec else f"<h3>{html.escape(chart.title)}</h3>"
    return (f'<figure class="block"><figcaption>{heading}'
            f"<p>{html.escape(chart.description)}</p></figcaption>{figure}{link}"
            f"{_table(chart)}</figure>")


def _summary(rows: Rows | None, title: str) -> str:
    if rows is None or not rows.rows:
        return ""
    cells = "".join(f"<tr><th scope=\"row\">{html.escape(k.replace('_', ' '))}</th>"
                    f'<td class="n">{_cell(v, "text" if isinstance(v, str) else "int")}'
                    "</td></tr>" for k, v in rows.records()[0].items())
    return (f'<div class="summary"><h3>{html.escape(title)} '
            f"(<code>{rows.view}</code>)</h3><table>{cells}</table></div>")


def _facts(spec: Spec, source: str, ran: str) -> str:
    items = [("spec", printable(spec.path or spec.file, False)), ("source", source),
             ("run at", ran), ("grain", spec.grain + (f", weeks from {spec.week_start}"
                                                     if spec.grain == "week" else ""))]
    for label, part in (("activity", spec.activity), ("revenue", spec.revenue)):
        if part is not None:
            extra = (f"; where {part.where}" if part.where else "") + (
                f"; time zone {part.timezone}" if part.timezone else "")
            items.append((label, _name(spec, part) + extra))
    items.append(("sqlgen", __version__))
    return "<dl>" + "".join(f"<dt>{html.escape(k)}</dt><dd>{html.escape(v)}</dd>"
                            for k, v in items) + "</dl>"


def _spec_text(spec: Spec) -> str:
    """The spec file as it was read, under a toggle (nothing when it cannot be read)."""
    try:
        text = Path(spec.path or spec.file).read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError):
        return ""
    return (f"<details><summary>The spec</summary><pre>{html.escape(text)}</pre></details>")


CSS = """
:root { color-scheme: light; }
* { box-sizing: border-box; }
body { margin: 0; background: #ffffff; color: #1a1a1a;
       font: 14px/1.45 Helvetica, Arial, sans-serif; }
main { max-width: 760px; margin: 0 auto; padding: 28px 20px 48px; }
h1 { font-size: 24px; margin: 0 0 4px; }
h2 { font-size: 18px; margin: 36px 0 8px; padding-bottom: 4px; border-bottom: 2px solid #1a1a1a; }
h3 { font-size: 15px; margin: 0 0 2px; }
p { margin: 4px 0 8px; }
dl { display: grid; grid-template-columns: max-content 1fr; gap: 2px 14px; margin: 12px 0; }
dt { color: #555555; } dd { margin: 0; overflow-wrap: anywhere; }
.caution { border-left: 4px solid #E69F00; background: #fff8e8; padding: 10px 14px;
           margin: 16px 0; }
.caution p { margin: 4px 0; }
.summaries { display: flex; gap: 24px; flex-wrap: wrap; }
.summary table td, .summary table th { padding: 1px 8px 1px 0; }
.summary th { text-align: left; font-weight: normal; color: #333333; }
nav ul { padding-left: 18px; margin: 4px 0; }
.block { margin: 22px 0; page-break-inside: avoid; break-inside: avoid; }
figure { margin: 0; }
figcaption p { color: #555555; font-size: 13px; }
.chart { width: 680px; max-width: 100%; margin: 6px 0; overflow: hidden; }
.chart svg { max-width: 100%; height: auto; }
.message { background: #f3f6fa; border-left: 4px solid #0072B2; padding: 10px 14px; }
.png { font-size: 12px; color: #555555; margin: 0; }
details.numbers { margin-top: 6px; }
summary { cursor: pointer; color: #0b5a8c; font-size: 13px; }
.scroll { max-height: 360px; overflow: auto; border: 1px solid #e0e0e0; margin-top: 4px; }
table { border-collapse: collapse; font-size: 12px; font-variant-numeric: tabular-nums; }
thead th { position: sticky; top: 0; background: #f2f2f2; }
th, td { padding: 2px 8px; border-bottom: 1px solid #eeeeee; }
.n { text-align: right; } .t { text-align: left; }
code { font-size: 12px; }
pre { background: #f6f6f6; padding: 8px 10px; font-size: 12px; overflow-x: auto; }
footer { margin-top: 40px; color: #555555; font-size: 12px; }
@page { size: auto; margin: 12mm; }
@media print {
  main { max-width: none; padding: 0; }
  .scroll { max-height: none; overflow: visible; border: 0; }
  summary { color: #1a1a1a; }
  h2 { break-after: avoid; }
}
"""

# Renders every chart, keeps each Vega view for inspection (window.sqlgenViews), marks the
# body when done, and opens the tables before printing.
SNIPPET = """
window.sqlgenViews = {};
(async function () {
  const specs = JSON.parse(document.getElementById('sqlgen-charts').textContent);
  for (const key of Object.keys(specs)) {
    const result = await vegaEmbed('#chart-' + key, specs[key],
                                   {actions: false, renderer: 'svg'});
    window.sqlgenViews[key] = result.view;
  }
  document.body.dataset.rendered = String(Object.keys(specs).length);
})().catch(function (err) {
  document.body.dataset.rendered = 'failed';
  console.error(err);
});
window.addEventListener('beforeprint', function () {
  document.querySelectorAll('details').forEach(function (d) { d.open = true; });
});
"""


@functools.cache
def _bundle(vl_version: str) -> str:
    """Vega, Vega-Lite and Vega-Embed in one script (``window.vegaEmbed``), from
    vl-convert. Bundling takes seconds, so the script is kept in the user's cache folder,
    named by both versions; a cache that cannot be written is skipped."""
    import vl_convert

    name = f"vega-bundle-{vl_convert.__version__}-{vl_version}.js"
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    cached = Path(base) / "sqlgen" / name
    try:
        return cached.read_text(encoding="utf-8")
    except OSError:
        pass
    text = vl_convert.javascript_bundle(vl_version=vl_version)
    try:
        cached.parent.mkdir(parents=True, exist_ok=True)
        _write(cached, text.encode("utf-8"))
    except OSError:
        pass
    return text


def _vl_version() -> str:
    import altair as alt

    return ".".join(alt.SCHEMA_VERSION.lstrip("v").split(".")[:2])


def _script_json(data: object) -> str:
    """JSON safe inside a <script> element."""
    return (json.dumps(data, sort_keys=True, separators=(",", ":"), allow_nan=False)
            .replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026"))


def render_html(spec: Spec, source: str, found: dict[str, Rows], parts: list[c.Section],
                ran: str, pngs: dict[str, str]) -> str:
    specs = {ch.key: ch.spec for s in parts for ch in s.charts if ch.spec}
    nav = "".join(f'<li><a href="#s{i}">{html.escape(s.title)}</a></li>'
                  for i, s in enumerate(parts))
    body = []
    for i, section in enumerate(parts):
        body.append(f'<section><h2 id="s{i}">{html.escape(section.title)}</h2>')
        body += [f'<p class="message">{html.escape(m)}</p>' for m in section.messages]
        body += [_chart(ch, pngs.get(ch.key)) for ch in section.charts]
        body.append("</section>")
    personal = ", ".join(f"<code>{name}</code>" for name in PERSONAL)
    title = f"sqlgen report: {printable(Path(spec.path or spec.file).name, False)}"
    return "\n".join([
        "<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        # Nothing may load from elsewhere: the page is whole, and a browser refuses any
        # request it would make (scripts and styles are inline).
        '<meta http-equiv="Content-Security-Policy" content="default-src \'none\'; '
        "script-src 'unsafe-inline' 'unsafe-eval'; style-src 'unsafe-inline'; "
        "img-src data:; font-src data:\">",
        f"<title>{html.escape(title)}</title>", f"<style>{CSS}</style>", "</head>",
        "<body>", "<main>", "<header>", "<h1>Growth report</h1>",
        _facts(spec, source, ran), _spec_text(spec),
        '<div class="caution" role="note">',
        "<p><strong>Management metrics, not audited figures.</strong> These numbers follow "
        "the source tables as the spec reads them; they are not financial statements nor "
        "revenue recognised under an accounting standard. Reconcile with finance before "
        "quoting them outside the company, and quote the grain, time zone and filter with "
        "them.</p>",
        f"<p><strong>Personal data.</strong> The per-user views ({personal}) hold personal "
        "data. This page shows aggregates only: no user or customer keys.</p>",
        "<p>A shaded, labelled period is still in progress: its data does not reach the "
        "period's end, so its churn is not final. Do not read it as a collapse.</p>",
        "</div>",
        '<div class="summaries">',
        _summary(found.get("activity_source_summary"), "Activity rows"),
        _summary(found.get("revenue_source_summary"), "Revenue rows"),
        "</div>",
        f"<nav><ul>{nav}</ul></nav>", "</header>", *body,
        "<footer>Charts drawn with Vega-Lite (built with Altair), every script embedded: the "
        "page makes no network request. Hover a chart for its values; the tables hold every "
        "number.</footer>",
        "</main>",
        f'<script type="application/json" id="sqlgen-charts">{_script_json(specs)}</script>',
        f"<script>{_bundle(_vl_version())}</script>", f"<script>{SNIPPET}</script>",
        "</body>", "</html>", ""])


def _png_folder(out: Path) -> Path:
    return out.with_name(out.stem + "-charts")


def write_report(spec: Spec, source: str, found: dict[str, Rows], out: Path,
                 source_label: str, now: dt.datetime | None = None,
                 pngs: bool = True) -> Report:
    """Write the page and (unless ``pngs`` is false) its PNGs; return where they are."""
    import vl_convert

    parts = sections(spec, found)
    ran = (now or dt.datetime.now(dt.UTC)).strftime("%Y-%m-%d %H:%M UTC")
    folder = _png_folder(out)
    charts = [ch for s in parts for ch in s.charts if ch.spec] if pngs else []
    links = {ch.key: f"{folder.name}/{ch.key}.png" for ch in charts}
    written = []
    try:
        if charts:
            folder.mkdir(parents=True, exist_ok=True)
        for ch in charts:
            path = folder / f"{ch.key}.png"
            data = vl_convert.vegalite_to_png(ch.spec, scale=c.PNG_SCALE,
                                              vl_version=_vl_version())
            _write(path, data)
            written.append(path)
        _write(out, render_html(spec, source_label, found, parts, ran, links).encode("utf-8"))
    except OSError as err:
        raise OutputError(f"{err.filename or out}: cannot write the report "
                          f"({err.strerror or err})") from None
    return Report(out, tuple(written), tuple(parts))


def _write(path: Path, data: bytes) -> None:
    tmp = path.with_name(f".{path.name}.sqlgen-tmp-{os.getpid()}")
    tmp.write_bytes(data)
    os.replace(tmp, path)
