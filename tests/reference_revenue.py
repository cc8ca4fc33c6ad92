"""Plain-Python reference of recurring-revenue accounting, the oracle for the revenue views.

Standard library only (decimal, datetime, collections) plus the calendar helpers of the
growth reference (tests/reference.py, also plain Python); no SQL. Every rule is written
out step by step, differently from the SQL (which works on integer units and segments):

- A customer's *period total* is the sum of its charges in the period, or of its
  subscription shares (below), kept at the amount's scale.
- *Revenue* of a customer in a period is the period total when it is positive, else 0: a
  zero or negative total (refunds, credits) counts as no revenue and is flagged.
- Per customer and period with revenue now or before: new (first period with revenue),
  expansion / contraction / retained_flat (revenue in both periods: more, less, the same),
  resurrected (revenue now, none in the previous period, some before), churned (revenue in
  the previous period, none now; never after the last period); no_revenue for a zero or
  negative total after a period without revenue.
- Subscriptions, ``measure='run_rate'`` (the default): a customer's period total is the sum
  of the monthly amounts (amount / months in the interval, rounded to the scale half away
  from zero, per subscription) of its subscriptions in force on the period's last day
  (start <= that day < end), at every grain. A counted subscription in force on no
  period's last day is counted in ``no_run_rate_rows``.
- Subscriptions, ``measure='recognized'``: month, quarter and year grains: amount / (months
  in the interval) for each calendar month covered in full, times covered days / days in
  the month for a month covered in part. Day and week grains: amount * 12 / (months in the
  interval) / 365 per covered day. A share is one subscription's days in one period and
  (for month-family grains) one month; each share is rounded to the scale, half away from
  zero; shares are summed.
- The valid range (the spec's valid_from inclusive, valid_until exclusive; by default
  1990-01-01 and 2100-01-01) applies to the local date of a charge or of a subscription's
  start: outside it the row is out_of_range. A subscription ending before valid_from is
  out_of_range too; one ending on or after valid_until has no end, like one whose end is None.
- Periods run from the period of the first counted date to the period of the last (a
  charge's date, a subscription's start or end), empty periods included.

Regenerate the revenue fixtures' expected files with ``python tests/reference_revenue.py``.
"""

from __future__ import annotations

import calendar
import csv
from collections import defaultdict
from datetime import date, datetime, timedelta
from decimal import ROUND_HALF_UP, Decimal
from pathlib import Path

from reference import (
    GRAIN_LABELS,
    VALID_RANGE,
    csv_text,
    local_date,
    next_period_start,
    period_end,
    period_start,
    previous_period_start,
    range_side,
)

MONEY = ("revenue", "previous_revenue", "new_revenue", "expansion_revenue",
         "resurrected_revenue", "contraction_revenue", "churned_revenue", "retained_revenue")
CUSTOMER_COLUMNS = ("customer_id", "period_start", "revenue", "previous_revenue", "state",
                    "new_revenue", "expansion_revenue", "resurrected_revenue",
                    "contraction_revenue", "churned_revenue", "retained_revenue",
                    "period_amount", "counted_as_zero")
ACCOUNTING_COLUMNS = ("period_start", *MONEY, "customers", "previous_customers",
                      "new_customers", "expansion_customers", "resurrected_customers",
                      "contraction_customers", "churned_customers", "retained_customers",
                      "flat_customers", "quick_ratio", "gross_revenue_retention",
                      "net_revenue_retention", "zeroed_customers", "zeroed_amount",
                      "amount_total", "period_status")
SUMMARY_COLUMNS = ("source_rows", "null_customer_rows", "null_date_rows", "null_amount_rows",
                   "filtered_out_rows", "out_of_range_rows", "invalid_rows", "counted_rows",
                   "first_date", "last_date")
MONEY_COLUMNS = set(MONEY) | {"period_amount", "zeroed_amount", "amount_total"}
FLOAT_COLUMNS = {"quick_ratio", "gross_revenue_retention", "net_revenue_retention"}
INTERVAL_MONTHS = {"month": 1, "monthly": 1, "quarter": 3, "quarterly": 3, "year": 12,
                   "yearly": 12}
MONTH_FAMILY = ("month", "quarter", "year")
ZERO = Decimal(0)


# --------------------------------------------------------------------------- source rows


def _status(customer, value, amount, currency, keep_currency, side):
    """The row's status from its raw date ``value`` and that date's range_side ``side``."""
    if customer is None:
        return "null_customer"
    if value is None:
        return "null_date"
    if amount is None:
        return "null_amount"
    if keep_currency is not None and currency != keep_currency:
        return "filtered_out"  # SQL: currency = 'EUR' is not true for NULL either
    if side != 0:
        return "out_of_range"
    return "counted"


def _summary(statuses, counted_dates, last_dates):
    count = {s: statuses.count(s) for s in ("null_customer", "null_date", "null_amount",
                                            "filtered_out", "out_of_range", "invalid",
                                            "counted")}
    return {"source_rows": len(statuses), "null_customer_rows": count["null_customer"],
            "null_date_rows": count["null_date"], "null_amount_rows": count["null_amount"],
            "filtered_out_rows": count["filtered_out"],
            "out_of_range_rows": count["out_of_range"], "invalid_rows": count["invalid"],
            "counted_rows": count["counted"],
            "first_date": min(counted_dates, default=None),
            "last_date": max(last_dates, default=None)}


def charges_source(charges, timezone=None, keep_currency=None, valid=VALID_RANGE):
    """(summary dict, counted [(customer, local date, amount)]) for charge tuples.

    A charge is ``(customer, ts, amount[, currency])``; currency defaults to 'EUR'.
    """
    statuses, counted = [], []
    for row in charges:
        customer, ts, amount = row[:3]
        currency = row[3] if len(row) > 3 else "EUR"
        side = None if ts is None else range_side(ts, timezone, valid)
        status = _status(customer, ts, amount, currency, keep_currency, side)
        statuses.append(status)
        if status == "counted":
            counted.append((customer, local_date(ts, timezone), amount))
    days = [d for _, d, _ in counted]
    return _summary(statuses, days, days), counted


def subscriptions_source(subscriptions, timezone=None, keep_currency=None, valid=VALID_RANGE):
    """(summary, counted [(customer, start, end or None, amount, months)]).

    A subscription is ``(customer, start, end, amount, interval[, currency])``. It is out of
    range when its start is outside the valid range or its end before it; an end after the
    range counts as no end. It is invalid (counted in invalid_rows, left out) when the
    interval is unknown or end <= start.
    """
    statuses, counted = [], []
    for row in subscriptions:
        customer, start, end, amount, interval = row[:5]
        currency = row[5] if len(row) > 5 else "EUR"
        side = None if start is None else range_side(start, timezone, valid)
        end_side = None if end is None else range_side(end, timezone, valid)
        first = local_date(start, timezone) if side == 0 else None
        last = local_date(end, timezone) if end_side == 0 else None
        status = _status(customer, start, amount, currency, keep_currency, side)
        if status == "counted" and end_side == -1:
            status = "out_of_range"
        months = INTERVAL_MONTHS.get(interval.lower()) if interval is not None else None
        if status == "counted" and (months is None or (last is not None and last <= first)):
            status = "invalid"
        statuses.append(status)
        if status == "counted":
            counted.append((customer, first, last, amount, months))
    starts = [s for _, s, _, _, _ in counted]
    newest = [e if e is not None else s for _, s, e, _, _ in counted]
    return _summary(statuses, starts, newest), counted


# --------------------------------------------------------------------------- period totals


def _unit(scale):
    return Decimal(1).scaleb(-scale)


def charge_totals(counted, grain, week_start="monday", scale=2):
    """{(customer, period_start): total} summing the counted charges."""
    totals = defaultdict(lambda: ZERO)
    for customer, day, amount in counted:
        totals[(customer, period_start(day, grain, week_start))] += amount
    return {k: v.quantize(_unit(scale), ROUND_HALF_UP) for k, v in totals.items()}


def _round_half_away(numerator, denominator):
    """numerator / denominator rounded to an integer, halves away from zero (denominator > 0)."""
    sign = -1 if numerator < 0 else 1
    quotient, remainder = divmod(abs(numerator), denominator)
    if 2 * remainder >= denominator:
        quotient += 1
    return sign * quotient


def subscription_totals(counted, grain, week_start, scale, last_date):
    """{(customer, period_start): total} of the subscription shares, walking day by day.

    Days run from each start to its end (exclusive), or to the end of the last period
    (the one holding ``last_date``) for a running subscription.
    """
    horizon = period_end(last_date, grain, week_start)
    days_covered = defaultdict(int)  # (subscription index, period, month) -> days
    for index, (_customer, start, end, _amount, _months) in enumerate(counted):
        day = start
        stop = min(end, horizon) if end is not None else horizon
        while day < stop:
            month = (day.year, day.month) if grain in MONTH_FAMILY else None
            days_covered[(index, period_start(day, grain, week_start), month)] += 1
            day += timedelta(days=1)
    totals = defaultdict(int)  # in units of the scale
    for (index, period, month), days in days_covered.items():
        customer, _start, _end, amount, months = counted[index]
        units = int((amount * 10 ** scale).to_integral_value(ROUND_HALF_UP))
        if month is not None:  # share of the month: amount / months * days / days in month
            share = _round_half_away(units * days, months * calendar.monthrange(*month)[1])
        else:  # constant daily rate: amount * 12 / months / 365
            share = _round_half_away(units * 12 * days, months * 365)
        totals[(customer, period)] += share
    return {k: Decimal(v).scaleb(-scale) for k, v in totals.items()}


def run_rate_totals(counted, grain, week_start, scale, first_date, last_date):
    """({(customer, period_start): run rate}, subscriptions in force at no period's end).

    Walks the periods from the first to the last; on each period's last day, adds the
    monthly amount of every subscription in force that day (start <= day < end, or
    running) to its customer's total.
    """
    totals = defaultdict(int)  # in units of the scale
    in_force_once = set()
    period = period_start(first_date, grain, week_start)
    while period <= last_date:
        last_day = period_end(period, grain, week_start) - timedelta(days=1)
        for index, (customer, start, end, amount, months) in enumerate(counted):
            if start <= last_day and (end is None or last_day < end):
                units = int((amount * 10 ** scale).to_integral_value(ROUND_HALF_UP))
                totals[(customer, period)] += _round_half_away(units, months)
                in_force_once.add(index)
        period = next_period_start(period, grain, week_start)
    never = len(counted) - len(in_force_once)
    return {k: Decimal(v).scaleb(-scale) for k, v in totals.items()}, never


# --------------------------------------------------------------------------- accounting


def _state(current, previous, period, first_paid):
    if current > 0 and previous > 0:
        if current > previous:
            return "expansion"
        return "contraction" if current < previous else "retained_flat"
    if current > 0:
        return "new" if period == first_paid else "resurrected"
    return "churned" if previous > 0 else "no_revenue"


def customer_revenue(totals, last_period, grain, week_start="monday"):
    """customer_revenue rows (dicts keyed by CUSTOMER_COLUMNS, plus period_key-free)."""
    by_customer = defaultdict(dict)
    for (customer, period), total in totals.items():
        by_customer[customer][period] = total
    rows = []
    for customer, periods in by_customer.items():
        paying = {p: t for p, t in periods.items() if t > 0}
        first_paid = min(paying, default=None)
        keys = set(periods)
        keys |= {q for q in (next_period_start(p, grain, week_start) for p in paying)
                 if q <= last_period}
        for p in sorted(keys):
            current = paying.get(p, ZERO)
            previous = paying.get(previous_period_start(p, grain, week_start), ZERO)
            rows.append(_customer_row(customer, p, current, previous, periods.get(p),
                                      _state(current, previous, p, first_paid)))
    return rows


def _customer_row(customer, period, current, previous, total, state):
    zero = current * 0
    return {
        "customer_id": customer, "period_start": period, "revenue": current,
        "previous_revenue": previous, "state": state,
        "new_revenue": current if state == "new" else zero,
        "expansion_revenue": current - previous if state == "expansion" else zero,
        "resurrected_revenue": current if state == "resurrected" else zero,
        "contraction_revenue": previous - current if state == "contraction" else zero,
        "churned_revenue": previous if state == "churned" else zero,
        "retained_revenue": min(current, previous),
        "period_amount": total,
        "counted_as_zero": 1 if total is not None and total <= 0 else 0,
    }


def _ratio(numerator, denominator):
    return None if denominator == 0 else float(numerator) / float(denominator)


def revenue_accounting(customer_rows, first_date, last_date, grain, week_start="monday"):
    """One dict per period from the first to the last (ACCOUNTING_COLUMNS), empty included."""
    if first_date is None:
        return []
    by_period = defaultdict(list)
    for row in customer_rows:
        by_period[row["period_start"]].append(row)
    rows = []
    p = period_start(first_date, grain, week_start)
    last = period_start(last_date, grain, week_start)
    while p <= last:
        rows.append(_accounting_row(p, by_period[p]))
        p = next_period_start(p, grain, week_start)
    last_day = period_end(last, grain, week_start) - timedelta(days=1)
    if rows and last_date != last_day:
        rows[-1]["period_status"] = "in_progress"
    return rows


def _accounting_row(period, rows):
    total = {c: sum((r[c] for r in rows), ZERO) for c in MONEY}
    states = [r["state"] for r in rows]
    new, res, exp = total["new_revenue"], total["resurrected_revenue"], total["expansion_revenue"]
    con, churn, prev = total["contraction_revenue"], total["churned_revenue"], \
        total["previous_revenue"]
    zeroed = [r for r in rows if r["counted_as_zero"]]
    return {
        "period_start": period, **total,
        "customers": sum(1 for r in rows if r["revenue"] > 0),
        "previous_customers": sum(1 for r in rows if r["previous_revenue"] > 0),
        "new_customers": states.count("new"),
        "expansion_customers": states.count("expansion"),
        "resurrected_customers": states.count("resurrected"),
        "contraction_customers": states.count("contraction"),
        "churned_customers": states.count("churned"),
        "retained_customers": sum(1 for r in rows if r["revenue"] > 0
                                  and r["previous_revenue"] > 0),
        "flat_customers": states.count("retained_flat"),
        "quick_ratio": _ratio(new + res + exp, churn + con),
        "gross_revenue_retention": _ratio(prev - churn - con, prev),
        "net_revenue_retention": _ratio(prev - churn - con + exp, prev),
        "zeroed_customers": len(zeroed),
        "zeroed_amount": sum((r["period_amount"] for r in zeroed), ZERO),
        "amount_total": sum((r["period_amount"] for r in rows
                             if r["period_amount"] is not None), ZERO),
        "period_status": "complete",
    }


def revenue_views(rows, shape, grain, week_start="monday", timezone=None,
                  keep_currency=None, scale=2, measure="run_rate", valid=VALID_RANGE):
    """{'revenue_source_summary': [..], 'customer_revenue': [..], 'revenue_accounting': [..]}.

    ``measure`` ('run_rate' or 'recognized') applies to subscriptions only; with run_rate
    the summary has ``no_run_rate_rows`` too.
    """
    if shape == "charges":
        summary, counted = charges_source(rows, timezone, keep_currency, valid)
        totals = charge_totals(counted, grain, week_start, scale)
    else:
        summary, counted = subscriptions_source(rows, timezone, keep_currency, valid)
        totals = {}
        if measure == "run_rate":
            never = 0
            if counted:
                totals, never = run_rate_totals(counted, grain, week_start, scale,
                                                summary["first_date"], summary["last_date"])
            summary = _with_no_run_rate_rows(summary, never)
        elif counted:
            totals = subscription_totals(counted, grain, week_start, scale,
                                         summary["last_date"])
    first, last = summary["first_date"], summary["last_date"]
    customers = (customer_revenue(totals, period_start(last, grain, week_start), grain,
                                  week_start) if last else [])
    accounting = revenue_accounting(customers, first, last, grain, week_start)
    return {"revenue_source_summary": [summary], "customer_revenue": _at_scale(customers, scale),
            "revenue_accounting": _at_scale(accounting, scale)}


def _with_no_run_rate_rows(summary, count):
    """The summary with no_run_rate_rows after counted_rows, where the view has it."""
    items = list(summary.items())
    at = [k for k, _v in items].index("counted_rows") + 1
    return dict(items[:at] + [("no_run_rate_rows", count)] + items[at:])


def _at_scale(rows, scale):
    """Money values written with the scale's digits (0 as 0.00), as the views show them."""
    unit = _unit(scale)
    return [{c: v.quantize(unit) if c in MONEY_COLUMNS and v is not None else v
             for c, v in row.items()} for row in rows]


def identity_failures(rows):
    """The identities each customer_revenue or revenue_accounting row must satisfy exactly.

    Returns a list of (period, identity) that fail; values must be Decimals (or ints).
    """
    failures = []
    for r in rows:
        checks = {
            "revenue = previous + new + resurrected + expansion - contraction - churned":
                r["revenue"] == r["previous_revenue"] + r["new_revenue"]
                + r["resurrected_revenue"] + r["expansion_revenue"]
                - r["contraction_revenue"] - r["churned_revenue"],
            "previous = retained + contraction + churned":
                r["previous_revenue"] == r["retained_revenue"] + r["contraction_revenue"]
                + r["churned_revenue"],
        }
        if "customers" in r:
            checks["customers = previous + new + resurrected - churned"] = (
                r["customers"] == r["previous_customers"] + r["new_customers"]
                + r["resurrected_customers"] - r["churned_customers"])
            checks["previous customers = retained + churned"] = (
                r["previous_customers"] == r["retained_customers"] + r["churned_customers"])
            checks["amount_total = revenue + zeroed_amount"] = (
                r["amount_total"] == r["revenue"] + r["zeroed_amount"])
        failures += [(r["period_start"], name) for name, ok in checks.items() if not ok]
    return failures


# --------------------------------------------------------------------------- fixtures

FIXTURES_DIR = Path(__file__).resolve().parent.parent / "fixtures"
# fixture -> (shape, input file, grain labels with expected files, measure)
REVENUE_FIXTURES = {
    "revenue_seats": ("charges", "charges.csv", ("month", "quarter", "week_monday"), None),
    "revenue_plans": ("subscriptions", "subscriptions.csv", ("month", "quarter", "week_monday"),
                      "recognized"),
    "revenue_run_rate": ("subscriptions", "subscriptions.csv", ("month", "week_monday"),
                         "run_rate"),
}
KEEP_CURRENCY = "EUR"  # the fixtures' specs say where: "currency = 'EUR'"
# Fixtures the engine suites run at the grains of their expected files only (the property
# tests cover the other grains), to keep the slow engines within CI's budget.
LABELLED_GRAINS_ONLY = ("revenue_run_rate",)


def fixture_cases(grains):
    """(fixture, grain, week_start) for the engine suites, from (grain, week_start) pairs."""
    return [(name, grain, week_start) for name in sorted(REVENUE_FIXTURES)
            for grain, week_start in grains
            if name not in LABELLED_GRAINS_ONLY
            or (grain, week_start) in {GRAIN_LABELS[label] for label in REVENUE_FIXTURES[name][2]}]


def _cell(text, parse):
    return None if text == "" else parse(text)


def _moment(text):
    return datetime.fromisoformat(text) if "T" in text or " " in text else date.fromisoformat(text)


def read_fixture_rows(name):
    """The fixture's input rows as the tuples load_revenue and revenue_views take."""
    shape, file, _labels, _measure = REVENUE_FIXTURES[name]
    with (FIXTURES_DIR / name / file).open(encoding="utf-8", newline="") as f:
        records = list(csv.DictReader(f))
    if shape == "charges":
        return [(_cell(r["account_id"], str), _cell(r["charged_at"], _moment),
                 _cell(r["amount"], Decimal), _cell(r["currency"], str)) for r in records]
    return [(_cell(r["account_id"], str), _cell(r["started_at"], _moment),
             _cell(r["ended_at"], _moment), _cell(r["amount"], Decimal),
             _cell(r["billing_interval"], str), _cell(r["currency"], str)) for r in records]


def fixture_views(name, label):
    shape, _file, _labels, measure = REVENUE_FIXTURES[name]
    grain, week_start = GRAIN_LABELS[label]
    return revenue_views(read_fixture_rows(name), shape, grain, week_start,
                         keep_currency=KEEP_CURRENCY, measure=measure)


def expected_path(name, view, label):
    return FIXTURES_DIR / name / "expected" / f"{view}_{label}.csv"


def read_expected(path):
    """An expected CSV as dicts: dates, Decimals, ints and floats parsed by column."""
    def parse(column, text):
        if text == "":
            return None
        if column in ("period_start", "first_date", "last_date"):
            return date.fromisoformat(text)
        if column in MONEY_COLUMNS:
            return Decimal(text)
        if column in FLOAT_COLUMNS:
            return float(text)
        if column.endswith(("customers", "_rows")) or column == "counted_as_zero":
            return int(text)
        return text
    with Path(path).open(encoding="utf-8", newline="") as f:
        return [{c: parse(c, v) for c, v in r.items()} for r in csv.DictReader(f)]


def write_fixture_expectations():
    """Rewrite every revenue fixture's expected files from this reference."""
    for name, (_shape, _file, labels, _measure) in REVENUE_FIXTURES.items():
        for label in labels:
            views = fixture_views(name, label)
            ordered = sorted(views["customer_revenue"],
                             key=lambda r: (r["period_start"], r["customer_id"]))
            files = {"revenue_accounting": csv_text(views["revenue_accounting"],
                                                    ACCOUNTING_COLUMNS),
                     "customer_revenue": csv_text(ordered, CUSTOMER_COLUMNS)}
            for view, text in files.items():
                path = expected_path(name, view, label)
                path.parent.mkdir(parents=True, exist_ok=True)
                path.write_text(text, encoding="utf-8")
                print(path)
        summary = fixture_views(name, labels[0])["revenue_source_summary"]
        path = FIXTURES_DIR / name / "expected" / "revenue_source_summary.csv"
        path.write_text(csv_text(summary, tuple(summary[0])), encoding="utf-8")
        print(path)


if __name__ == "__main__":
    write_fixture_expectations()
