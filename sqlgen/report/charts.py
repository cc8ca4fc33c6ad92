"""The report's charts: Vega-Lite specifications built with Altair from the views' rows.

Each chart reads one named dataset holding one view's rows exactly as read (``run.Rows``),
so the page carries the numbers the database returned and a test can read them back from
the browser (``view.data(name)``). Transforms (folding, negating churn) happen inside the
chart, never in the rows.

A segmented view (``growth_accounting_by_segment``) gets one chart per segment, whose
drop-down parameter (``alt.binding_select``) picks the value shown.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field

from ..errors import SqlgenError
from .run import Rows

WIDTH, HEIGHT = 680, 280  # CSS pixels of each chart, legends and axes included
PNG_SCALE = 2  # PNGs are WIDTH * PNG_SCALE by HEIGHT * PNG_SCALE pixels

# Okabe and Ito's colour-blind-safe palette (common practice for categorical colour).
BLACK, ORANGE, SKY, GREEN, YELLOW, BLUE, VERMILLION, PURPLE = (
    "#000000", "#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7")
HEAT = "cividis"  # a sequential scheme readable with colour-vision deficiencies
IN_PROGRESS_FILL = "#8a8a8a"
VALIDATE = False  # check each chart against the Vega-Lite schema (slow: the tests turn it on)
QUICK_RATIO_CAP = 6.0  # the y axis of a quick ratio stops here; the table has every value


@dataclass(frozen=True)
class Column:
    """A column of a chart's table: the view column, its heading and its format."""

    name: str
    title: str
    kind: str = "int"  # int, signed, money, ratio, share, text


@dataclass(frozen=True)
class Chart:
    key: str  # element id and PNG file name
    title: str
    description: str
    spec: dict
    rows: Rows
    table: tuple[Column, ...]


@dataclass(frozen=True)
class Section:
    title: str
    charts: tuple[Chart, ...] = ()
    messages: tuple[str, ...] = field(default=())


class MissingExtra(SqlgenError):
    """The report's optional packages are not installed."""

    exit_code = 4


def _alt():
    try:
        import altair as alt
        import vl_convert  # noqa: F401
    except ImportError:
        raise MissingExtra("the report needs its optional packages: "
                           "pip install 'sqlgen-growth[report]'") from None
    return alt


def _finish(chart, rows: Rows, title: str, subtitle: str) -> dict:
    """The chart as a Vega-Lite dict: its dataset inline, a fixed size, a light theme."""
    spec = chart.properties(
        width=WIDTH, height=HEIGHT,
        title={"text": title, "subtitle": subtitle, "anchor": "start"},
    ).to_dict(validate=VALIDATE)
    spec["autosize"] = {"type": "fit", "contains": "padding"}
    spec["background"] = "#ffffff"
    spec["padding"] = {"top": 10, "left": 6, "right": 10, "bottom": 6}
    spec.setdefault("datasets", {})[rows.view] = rows.records()
    spec["config"] = {
        "font": "Helvetica, Arial, sans-serif",
        "view": {"stroke": None},
        "axis": {"labelColor": "#333333", "titleColor": "#333333", "gridColor": "#e6e6e6",
                 "domainColor": "#888888", "tickColor": "#888888", "labelFontSize": 11,
                 "titleFontSize": 12, "titleFontWeight": "normal"},
        "legend": {"orient": "top", "labelFontSize": 11, "titleFontSize": 11,
                   "titleFontWeight": "normal"},
        "title": {"fontSize": 15, "fontWeight": "bold", "subtitleColor": "#555555",
                  "subtitleFontSize": 11, "color": "#1a1a1a"},
    }
    return spec


def _period_axis(alt, grain: str):
    """An ordinal axis of period starts, labelled as the grain reads (2024-03, 2024-Q1)."""
    label = {
        "month": "slice(datum.value, 0, 7)",
        "quarter": "slice(datum.value, 0, 4) + '-Q' + "
                   "(floor((toNumber(slice(datum.value, 5, 7)) - 1) / 3) + 1)",
        "year": "slice(datum.value, 0, 4)",
    }.get(grain, "datum.value")
    title = {"day": "day", "week": "week starting"}.get(grain, grain)
    return alt.X("period_start:O", title=title,
                 axis=alt.Axis(labelExpr=label, labelAngle=-45, labelOverlap="greedy"))


def _in_progress(alt, base, grain: str):
    """A shaded band and a label over a period whose data does not reach its end."""
    flagged = base.transform_filter("datum.period_status == 'in_progress'")
    band = flagged.mark_rect(color=IN_PROGRESS_FILL, opacity=0.18).encode(
        x=_period_axis(alt, grain))
    # Above the plot's top edge, clear of the marks inside the band.
    text = flagged.mark_text(align="right", baseline="bottom", dx=0, dy=-3, fontSize=10,
                             color="#444444", angle=0).encode(
        x=alt.X("period_start:O", bandPosition=1), y=alt.value(0),
        text=alt.value("in progress"))
    return band, text


def _opacity(alt):
    return alt.condition("datum.period_status == 'in_progress'", alt.value(0.45),
                         alt.value(1.0))


def _legend_scale(alt, domain: list[str], colours: list[str]):
    return alt.Scale(domain=domain, range=colours)


def _user_bars(alt, base, grain: str, lead: list):
    """New and resurrected users stacked above zero, churned below (the users charts):
    the legend's domain, its colour scale and the bars; ``lead`` tooltips come first."""
    domain = ["new", "resurrected", "churned", "active users"]
    colour = _legend_scale(alt, domain, [GREEN, SKY, VERMILLION, BLACK])
    bars = base.transform_calculate(
        new="datum.new_users", resurrected="datum.resurrected_users",
        churned="-datum.churned_users",
    ).transform_fold(["new", "resurrected", "churned"], as_=["component", "users"]).mark_bar(
    ).encode(
        x=_period_axis(alt, grain),
        y=alt.Y("users:Q", title="users (churned below zero)", stack="zero"),
        color=alt.Color("component:N", scale=colour, title=None, sort=domain),
        order=alt.Order("component_order:Q"),
        opacity=_opacity(alt),
        tooltip=[*lead, alt.Tooltip("period_start:N", title="period"),
                 alt.Tooltip("component:N"), alt.Tooltip("users:Q", format=",")],
    ).transform_calculate(component_order="indexof(['new', 'resurrected', 'churned'], "
                                          "datum.component)")
    return domain, colour, bars


def growth_users(rows: Rows, grain: str) -> Chart:
    alt = _alt()
    base = alt.Chart(alt.Data(name=rows.view))
    domain, colour, bars = _user_bars(alt, base, grain, [])
    line = base.transform_calculate(series="'active users'").mark_line(
        point=True, strokeWidth=2).encode(
        x=_period_axis(alt, grain), y=alt.Y("active_users:Q"),
        color=alt.Color("series:N", scale=colour, title=None, sort=domain),
        tooltip=[alt.Tooltip("period_start:N", title="period"),
                 alt.Tooltip("active_users:Q", title="active users", format=","),
                 alt.Tooltip("retained_users:Q", title="retained", format=","),
                 alt.Tooltip("net_change:Q", title="net change", format="+,")])
    band, text = _in_progress(alt, base, grain)
    spec = _finish(alt.layer(band, bars, line, text), rows, "Active users and what moved them",
                   "New and resurrected users above zero, churned users below; the line is "
                   "active users. Users per period.")
    return Chart("users", "Active users and what moved them",
                 "Each period's active users split into new, retained and resurrected; "
                 "last period's actives who did not return are churned.", spec, rows,
                 (Column("period_start", "period", "text"),
                  Column("active_users", "active"), Column("new_users", "new"),
                  Column("retained_users", "retained"),
                  Column("resurrected_users", "resurrected"),
                  Column("churned_users", "churned"), Column("net_change", "net", "signed"),
                  Column("period_status", "status", "text")))


def segment_users(rows: Rows, grain: str, segment: str, kind: str) -> Chart:
    """Active users and what moved them for one segment's values, one value at a time: a
    drop-down under the chart picks the value (the rows of every value are embedded; the
    table under the chart lists them all). Values are shown as the view has them, NULL
    for no value."""
    alt = _alt()
    mine = Rows(rows.view, rows.columns,
                tuple(r for r, d in zip(rows.rows, rows.records()) if d["segment"] == segment))
    values = sorted({d["segment_value"] for d in mine.records()},
                    key=lambda v: (v is None, str(v)))
    pick = alt.param(name=f"pick_{segment}", value=values[0],
                     bind=alt.binding_select(options=values,
                                             labels=["NULL" if v is None else str(v)
                                                     for v in values],
                                             name=f"{segment}: "))
    base = alt.Chart(alt.Data(name=rows.view)).transform_filter(
        alt.datum.segment == segment).transform_filter(f"datum.segment_value === {pick.name}")
    domain, colour, bars = _user_bars(alt, base, grain,
                                      [alt.Tooltip("segment_value:N", title=segment)])
    line = base.transform_calculate(series="'active users'").mark_line(
        point=True, strokeWidth=2).encode(
        x=_period_axis(alt, grain), y=alt.Y("active_users:Q"),
        color=alt.Color("series:N", scale=colour, title=None, sort=domain),
        tooltip=[alt.Tooltip("segment_value:N", title=segment),
                 alt.Tooltip("period_start:N", title="period"),
                 alt.Tooltip("active_users:Q", title="active users", format=","),
                 alt.Tooltip("quick_ratio:Q", title="quick ratio", format=".2f")])
    band, text = _in_progress(alt, base, grain)
    adds = ("the values' counts add up to the totals" if kind == "user" else
            "a user counts in every value they were active in, so the values' counts need "
            "not add up to the totals")
    title = f"Active users by {segment}"
    spec = _finish(alt.layer(band, bars, line, text).add_params(pick), rows, title,
                   f"Pick a value of {segment} under the chart. Segment kind {kind}: {adds}.")
    return Chart(f"segment_{segment}", title,
                 f"Growth accounting per value of the segment {segment} (kind {kind}); {adds}.",
                 spec, mine,
                 (Column("segment_value", segment, "text"),
                  Column("period_start", "period", "text"),
                  Column("active_users", "active"), Column("new_users", "new"),
                  Column("retained_users", "retained"),
                  Column("resurrected_users", "resurrected"),
                  Column("churned_users", "churned"),
                  Column("quick_ratio", "quick ratio", "ratio"),
                  Column("period_status", "status", "text")))


def net_change(rows: Rows, grain: str) -> Chart:
    alt = _alt()
    base = alt.Chart(alt.Data(name=rows.view))
    bars = base.transform_calculate(sign="datum.net_change < 0 ? 'shrank' : 'grew'").mark_bar(
    ).encode(
        x=_period_axis(alt, grain), y=alt.Y("net_change:Q", title="users, change on last period"),
        color=alt.Color("sign:N", title=None,
                        scale=alt.Scale(domain=["grew", "shrank"], range=[BLUE, ORANGE])),
        opacity=_opacity(alt),
        tooltip=[alt.Tooltip("period_start:N", title="period"),
                 alt.Tooltip("net_change:Q", title="net change", format="+,")])
    band, text = _in_progress(alt, base, grain)
    spec = _finish(alt.layer(band, bars, text), rows, "Net change in active users",
                   "Active users minus the previous period's active users.")
    return Chart("net_change", "Net change in active users",
                 "net change = new + resurrected − churned", spec, rows,
                 (Column("period_start", "period", "text"),
                  Column("previous_active_users", "previous active"),
                  Column("active_users", "active"), Column("net_change", "net", "signed")))


def _cap(values: list) -> float:
    finite = [v for v in values if isinstance(v, (int, float)) and math.isfinite(v)]
    top = max(finite, default=1.0)
    return float(min(max(2.0, math.ceil(top * 1.1)), QUICK_RATIO_CAP))


def _ratio_line(alt, base, field_: str, title: str, colour: str, grain: str, cap: float):
    return base.transform_calculate(series=json.dumps(title)).mark_line(
        point=True, clip=True, color=colour).encode(
        x=_period_axis(alt, grain),
        y=alt.Y(f"{field_}:Q", title="ratio", scale=alt.Scale(domain=[0, cap])),
        color=alt.Color("series:N", title=None,
                        scale=alt.Scale(domain=[title], range=[colour])),
        tooltip=[alt.Tooltip("period_start:N", title="period"),
                 alt.Tooltip(f"{field_}:Q", title=title, format=".2f")])


def _rule(alt, base, at: float, label: str):
    frame = alt.Chart(alt.Data(values=[{"y": at, "label": label}]))
    rule = frame.mark_rule(strokeDash=[5, 4], color="#555555").encode(y="y:Q")
    # Under the line: ratios of a growing base sit just above it.
    text = frame.mark_text(align="left", baseline="top", dx=4, dy=3, fontSize=10,
                           color="#444444").encode(y="y:Q", x=alt.value(0), text="label:N")
    return rule, text


def quick_ratio(rows: Rows, grain: str) -> Chart:
    alt = _alt()
    base = alt.Chart(alt.Data(name=rows.view))
    cap = _cap([r["quick_ratio"] for r in rows.records()])
    line = _ratio_line(alt, base, "quick_ratio", "quick ratio", PURPLE, grain, cap)
    rule, label = _rule(alt, base, 1.0, "1: gains equal losses")
    band, text = _in_progress(alt, base, grain)
    spec = _finish(alt.layer(band, rule, label, line, text), rows, "Quick ratio",
                   f"(new + resurrected) / churned; above 1 the user base grows. Axis cut at "
                   f"{cap:g}: the table has every value; no value where nobody churned.")
    return Chart("quick_ratio", "Quick ratio", "(new + resurrected) / churned", spec, rows,
                 (Column("period_start", "period", "text"),
                  Column("new_users", "new"), Column("resurrected_users", "resurrected"),
                  Column("churned_users", "churned"), Column("quick_ratio", "quick ratio",
                                                             "ratio")))


def rates(rows: Rows, grain: str) -> Chart:
    alt = _alt()
    base = alt.Chart(alt.Data(name=rows.view))
    domain = ["retention rate", "churn rate"]
    lines = base.transform_calculate(
        **{"retention rate": "datum.retention_rate", "churn rate": "datum.churn_rate"}
    ).transform_fold(domain, as_=["rate", "value"]).mark_line(point=True).encode(
        x=_period_axis(alt, grain),
        y=alt.Y("value:Q", title="share of the previous period's active users",
                axis=alt.Axis(format="%"), scale=alt.Scale(domain=[0, 1])),
        color=alt.Color("rate:N", title=None, scale=alt.Scale(domain=domain,
                                                              range=[BLUE, VERMILLION])),
        tooltip=[alt.Tooltip("period_start:N", title="period"), alt.Tooltip("rate:N"),
                 alt.Tooltip("value:Q", format=".1%")])
    band, text = _in_progress(alt, base, grain)
    spec = _finish(alt.layer(band, lines, text), rows, "Retention and churn rate",
                   "retained / previous active users and churned / previous active users")
    return Chart("rates", "Retention and churn rate",
                 "retention + churn = 100% of the previous period's active users", spec, rows,
                 (Column("period_start", "period", "text"),
                  Column("previous_active_users", "previous active"),
                  Column("retained_users", "retained"), Column("churned_users", "churned"),
                  Column("retention_rate", "retention", "share"),
                  Column("churn_rate", "churn", "share")))


def _heat(rows: Rows, key: str, title: str, subtitle: str, value: str, legend: str,
          grain: str, in_progress: str | None, table: tuple[Column, ...],
          row_field: str = "cohort_start", col_field: str = "age",
          col_title: str = "age (periods since the cohort's first)",
          row_title: str = "cohort (first period)", row_dates: bool = True) -> Chart:
    alt = _alt()
    base = alt.Chart(alt.Data(name=rows.view))
    flag = f"datum.period_start == {json.dumps(in_progress)}" if in_progress else "false"
    rect = base.mark_rect().encode(
        x=alt.X(f"{col_field}:O", title=col_title,
                axis=alt.Axis(labelAngle=0 if row_dates else -45, labelOverlap="greedy",
                              labelExpr="datum.value" if row_dates else _label_expr(grain))),
        y=alt.Y(f"{row_field}:O", title=row_title, sort="ascending" if row_dates else
                "descending", axis=alt.Axis(labelExpr=_label_expr(grain) if row_dates
                                            else "datum.value", labelOverlap="greedy")),
        color=alt.Color(f"{value}:Q", title=legend,
                        scale=alt.Scale(scheme=HEAT, domainMin=0),
                        legend=alt.Legend(format="%", orient="right")),
        stroke=alt.condition(flag, alt.value("#000000"), alt.value(None)),
        strokeWidth=alt.condition(flag, alt.value(1.5), alt.value(0)),
        tooltip=[alt.Tooltip(f"{row_field}:N", title=row_title),
                 alt.Tooltip(f"{col_field}:O", title=col_title),
                 alt.Tooltip(f"{value}:Q", title=legend, format=".1%")])
    note = ("; outlined cells: the period still in progress" if in_progress else "")
    spec = _finish(rect, rows, title, subtitle + note)
    return Chart(key, title, subtitle, spec, rows, table)


def _label_expr(grain: str) -> str:
    return {"month": "slice(datum.value, 0, 7)", "year": "slice(datum.value, 0, 4)"}.get(
        grain, "datum.value")


def cohorts(rows: Rows, grain: str, in_progress: str | None) -> Chart:
    return _heat(rows, "cohorts", "Cohort retention",
                 "Share of each cohort's users active at each age", "retention_rate",
                 "share of cohort active", grain, in_progress,
                 (Column("cohort_start", "cohort", "text"), Column("age", "age"),
                  Column("cohort_users", "cohort users"), Column("active_users", "active"),
                  Column("retention_rate", "retained", "share")))


def revenue_cohorts(rows: Rows, grain: str, in_progress: str | None) -> Chart:
    return _heat(rows, "revenue_cohorts", "Revenue cohorts",
                 "Each cohort's revenue as a share of its revenue at age 0 (net revenue "
                 "retention)", "net_revenue_retention", "revenue / age-0 revenue", grain,
                 in_progress,
                 (Column("cohort_start", "cohort", "text"), Column("age", "age"),
                  Column("cohort_customers", "customers"),
                  Column("paying_customers", "paying"), Column("revenue", "revenue", "money"),
                  Column("net_revenue_retention", "net retention", "share")))


def revenue(rows: Rows, grain: str) -> Chart:
    alt = _alt()
    base = alt.Chart(alt.Data(name=rows.view))
    parts = ["new", "expansion", "resurrected", "contraction", "churned"]
    domain = [*parts, "recurring revenue"]
    colour = alt.Scale(domain=domain, range=[GREEN, BLUE, SKY, ORANGE, VERMILLION, BLACK])
    bars = base.transform_calculate(
        new="datum.new_revenue", expansion="datum.expansion_revenue",
        resurrected="datum.resurrected_revenue", contraction="-datum.contraction_revenue",
        churned="-datum.churned_revenue",
    ).transform_fold(parts, as_=["component", "amount"]).transform_calculate(
        component_order=f"indexof({json.dumps(parts)}, datum.component)").mark_bar().encode(
        x=_period_axis(alt, grain),
        y=alt.Y("amount:Q", title="amount (source currency; losses below 0)",
                stack="zero"),
        color=alt.Color("component:N", scale=colour, title=None, sort=domain),
        order=alt.Order("component_order:Q"), opacity=_opacity(alt),
        tooltip=[alt.Tooltip("period_start:N", title="period"), alt.Tooltip("component:N"),
                 alt.Tooltip("amount:Q", format=",.2f")])
    line = base.transform_calculate(series="'recurring revenue'").mark_line(
        point=True, strokeWidth=2).encode(
        x=_period_axis(alt, grain), y=alt.Y("revenue:Q"),
        color=alt.Color("series:N", scale=colour, title=None, sort=domain),
        tooltip=[alt.Tooltip("period_start:N", title="period"),
                 alt.Tooltip("revenue:Q", title="revenue", format=",.2f"),
                 alt.Tooltip("customers:Q", title="customers", format=",")])
    band, text = _in_progress(alt, base, grain)
    spec = _finish(alt.layer(band, bars, line, text), rows, "Recurring revenue and its movements",
                   "New, expansion and resurrected above zero; contraction and churned below; "
                   "the line is recurring revenue.")
    return Chart("revenue", "Recurring revenue and its movements",
                 "revenue = previous + new + resurrected + expansion − contraction − churned",
                 spec, rows,
                 (Column("period_start", "period", "text"), Column("revenue", "revenue", "money"),
                  Column("new_revenue", "new", "money"),
                  Column("expansion_revenue", "expansion", "money"),
                  Column("resurrected_revenue", "resurrected", "money"),
                  Column("contraction_revenue", "contraction", "money"),
                  Column("churned_revenue", "churned", "money"),
                  Column("customers", "customers"), Column("period_status", "status", "text")))


def revenue_retention(rows: Rows, grain: str) -> Chart:
    alt = _alt()
    base = alt.Chart(alt.Data(name=rows.view))
    domain = ["gross revenue retention", "net revenue retention"]
    lines = base.transform_calculate(
        **{domain[0]: "datum.gross_revenue_retention", domain[1]: "datum.net_revenue_retention"}
    ).transform_fold(domain, as_=["measure", "value"]).mark_line(point=True).encode(
        x=_period_axis(alt, grain),
        y=alt.Y("value:Q", title="share of the previous period's revenue",
                axis=alt.Axis(format="%"), scale=alt.Scale(zero=False)),
        color=alt.Color("measure:N", title=None, scale=alt.Scale(domain=domain,
                                                                 range=[ORANGE, BLUE])),
        tooltip=[alt.Tooltip("period_start:N", title="period"), alt.Tooltip("measure:N"),
                 alt.Tooltip("value:Q", format=".1%")])
    rule, label = _rule(alt, base, 1.0, "100%: all of last period's revenue kept")
    band, text = _in_progress(alt, base, grain)
    spec = _finish(alt.layer(band, rule, label, lines, text), rows,
                   "Gross and net revenue retention",
                   "gross: (previous − churned − contraction) / previous; net adds expansion")
    return Chart("revenue_retention", "Gross and net revenue retention",
                 "Of last period's revenue, the share kept (gross) and kept plus expansion (net)",
                 spec, rows,
                 (Column("period_start", "period", "text"),
                  Column("previous_revenue", "previous", "money"),
                  Column("gross_revenue_retention", "gross retention", "share"),
                  Column("net_revenue_retention", "net retention", "share"),
                  Column("quick_ratio", "quick ratio", "ratio")))


def trailing(rows: Rows) -> list[Chart]:
    alt = _alt()
    base = alt.Chart(alt.Data(name=rows.view)).transform_calculate(
        window="datum.window_days + '-day window'")
    windows = sorted({r["window_days"] for r in rows.records()})
    names = [f"{n}-day window" for n in windows]
    colour = alt.Scale(domain=names, range=[BLUE, ORANGE, GREEN, PURPLE, SKY, VERMILLION][
        :len(names)] or [BLUE])
    actives = base.mark_line().encode(
        x=alt.X("day:T", title="day (window's last day)"),
        y=alt.Y("active_users:Q", title="users active in the window"),
        color=alt.Color("window:N", title=None, scale=colour),
        tooltip=[alt.Tooltip("day:T"), alt.Tooltip("window:N"),
                 alt.Tooltip("active_users:Q", format=",")])
    columns = (Column("day", "day", "text"), Column("window_days", "window"),
               Column("active_users", "active"), Column("new_users", "new"),
               Column("resurrected_users", "resurrected"), Column("churned_users", "churned"),
               Column("quick_ratio", "quick ratio", "ratio"))
    first = Chart("trailing", "Trailing actives",
                  "Users active in the N days ending each day", _finish(
                      actives, rows, "Trailing actives",
                      "Users active in the N days ending each day, per window length"),
                  rows, columns)
    cap = _cap([r["quick_ratio"] for r in rows.records()])
    ratio = base.mark_line(clip=True).encode(
        x=alt.X("day:T", title="day (window's last day)"),
        y=alt.Y("quick_ratio:Q", title="ratio", scale=alt.Scale(domain=[0, cap])),
        color=alt.Color("window:N", title=None, scale=colour),
        tooltip=[alt.Tooltip("day:T"), alt.Tooltip("window:N"),
                 alt.Tooltip("quick_ratio:Q", format=".2f")])
    rule, label = _rule(alt, base, 1.0, "1: gains equal losses")
    second = Chart("trailing_quick_ratio", "Trailing quick ratio",
                   "(new + resurrected) / churned against the previous window", _finish(
                       alt.layer(rule, label, ratio), rows, "Trailing quick ratio",
                       f"(new + resurrected) / churned, each window against the one before; "
                       f"axis cut at {cap:g}"), rows, columns)
    return [first, second]


def engagement(rows: Rows, grain: str, in_progress: str | None) -> Chart:
    return _heat(rows, "engagement", "Engagement depth",
                 "Share of each period's active users by the number of days they were active",
                 "share_of_active_users", "share of active users", grain, in_progress,
                 (Column("period_start", "period", "text"), Column("active_days", "days"),
                  Column("users", "users"),
                  Column("share_of_active_users", "share", "share"),
                  Column("daily_to_period_ratio", "daily / period actives", "ratio")),
                 row_field="active_days", col_field="period_start",
                 col_title=grain, row_title="distinct active days in the period",
                 row_dates=False)
