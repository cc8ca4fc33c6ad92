"""The views sqlgen generates: one table of names, templates, dependencies and columns.

Add a view by adding a template in templates/ and a View here; docs and tests read this table.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

from .spec import Spec


@dataclass(frozen=True)
class View:
    """One generated view. ``depends`` lists the views it reads, by name."""

    name: str
    summary: str
    columns: tuple[tuple[str, str], ...]
    depends: tuple[str, ...] = ()
    personal_data: bool = False
    enabled: Callable[[Spec], bool] = lambda spec: True
    reads: str = "activity"  # the spec section of its source table: activity or revenue
    option: str = ""  # the spec key that turns the view on, when it is optional

    @property
    def spec_key(self) -> str:
        """The spec key that asks for this view: its option, else its source section."""
        return self.option or self.reads

    @property
    def template(self) -> str:
        return f"{self.name}.sql"

    @property
    def column_names(self) -> tuple[str, ...]:
        return tuple(name for name, _doc in self.columns)


VIEWS: tuple[View, ...] = (
    View(
        "activity_source_summary",
        "One row counting the source rows: all, left out for a NULL user or timestamp, "
        "filtered out by `where`, outside the valid time range, not convertible to a local "
        "date, and counted as activity. Each row is in exactly one of these counts.",
        (("source_rows", "rows in the activity table"),
         ("null_user_rows", "rows left out because the user key is NULL"),
         ("null_timestamp_rows", "rows with a user but a NULL timestamp, left out"),
         ("filtered_out_rows", "rows with user and timestamp that `where` does not keep"),
         ("out_of_range_rows", "kept rows whose local date is before `activity.valid_from` "
                               "or on or after `activity.valid_until` (sentinel dates such "
                               "as 0001-01-01 or 9999-12-31); left out"),
         ("unconverted_rows", "kept rows whose local date came out NULL (on MySQL: a time "
                              "zone missing from the server's time zone tables); left out"),
         ("counted_rows", "rows counted as activity")),
        enabled=lambda spec: spec.activity is not None),
    View(
        "user_activity",
        "One row per user and active period.",
        (("user_id", "the user key"),
         ("period_key", "integer period index (consecutive periods differ by the grain's step)"),
         ("period_start", "first day of the period (DATE)"),
         ("events", "activity rows of the user in the period"),
         ("active_days", "distinct local dates with activity in the period"),
         ("first_active_date", "first local date with activity in the period"),
         ("last_active_date", "last local date with activity in the period")),
        personal_data=True, enabled=lambda spec: spec.activity is not None),
    View(
        "user_states",
        "One row per user and period in which the user is new, retained, resurrected or churned.",
        (("user_id", "the user key"),
         ("period_key", "integer period index"),
         ("period_start", "first day of the period (DATE)"),
         ("state", "new, retained, resurrected or churned")),
        personal_data=True,
        enabled=lambda spec: spec.activity is not None),
    View(
        "growth_accounting",
        "One row per period from the first period with activity to the last, empty periods "
        "included.",
        (("period_start", "first day of the period (DATE)"),
         ("active_users", "users active in the period"),
         ("previous_active_users", "users active in the previous period"),
         ("new_users", "users whose first active period this is"),
         ("retained_users", "users active in this and the previous period"),
         ("resurrected_users", "users active now, not in the previous period, but before"),
         ("churned_users", "users active in the previous period but not in this one"),
         ("net_change", "active_users - previous_active_users"),
         ("quick_ratio", "(new + resurrected) / churned; NULL when churned is 0"),
         ("retention_rate", "retained / previous actives; NULL without previous actives"),
         ("churn_rate", "churned / previous actives; NULL without previous actives"),
         ("period_status", "'in_progress' for a last period the data does not cover to its "
                           "end, else 'complete'"),
         ("period_key", "integer period index")),
        enabled=lambda spec: spec.activity is not None),
    View(
        "revenue_source_summary",
        "One row counting the revenue table's rows: all, left out (NULL customer, date or "
        "amount), filtered out by `where`, outside the valid time range, invalid, counted; "
        "and the dates they cover. Each row is in exactly one of these counts.",
        (("source_rows", "rows in the revenue table"),
         ("null_customer_rows", "rows left out because the customer key is NULL"),
         ("null_date_rows", "rows with a customer but a NULL timestamp (charges) or start "
                            "(subscriptions), left out"),
         ("null_amount_rows", "rows with customer and date but a NULL amount, left out"),
         ("filtered_out_rows", "rows with customer, date and amount that `where` does not keep"),
         ("out_of_range_rows", "kept rows whose local date (a charge's, a subscription's "
                               "start) is outside `revenue.valid_from` .. `valid_until`, or "
                               "a subscription ending before `valid_from`; left out"),
         ("invalid_rows", "subscriptions kept by `where` but left out: an unknown interval or "
                          "an end not after the start (always 0 for charges)"),
         ("counted_rows", "rows counted"),
         ("no_run_rate_rows", "subscriptions with `measure: run_rate` only: counted rows that "
                              "start and end inside one period, so in force at no period's "
                              "end and in no period's run rate"),
         ("first_date", "earliest local date counted: a charge's date or a subscription's "
                        "start (DATE)"),
         ("last_date", "newest local date counted: a charge's date, or a subscription's start "
                       "or end (DATE); periods run to the one holding it")),
        enabled=lambda spec: spec.revenue is not None, reads="revenue"),
    View(
        "customer_revenue",
        "One row per customer and period in which the customer has revenue, had revenue the "
        "period before, or has a zero or negative total: the revenue, its state and the "
        "amount each component contributes. Not revenue recognised under an accounting "
        "standard.",
        (("customer_id", "the customer key"),
         ("period_key", "integer period index"),
         ("period_start", "first day of the period (DATE)"),
         ("revenue", "revenue counted in the period: the customer's period total when "
                     "positive, else 0 (DECIMAL, the amount's scale)"),
         ("previous_revenue", "revenue counted in the previous period"),
         ("state", "new, expansion, contraction, retained_flat, resurrected or churned; "
                   "no_revenue for a zero or negative total after a period without revenue"),
         ("new_revenue", "revenue of a customer paying for the first time"),
         ("expansion_revenue", "revenue - previous_revenue when both are positive and it grew"),
         ("resurrected_revenue", "revenue of a customer paying again after a gap"),
         ("contraction_revenue", "previous_revenue - revenue when both are positive and it "
                                 "shrank"),
         ("churned_revenue", "previous_revenue of a customer without revenue now"),
         ("retained_revenue", "the part of previous_revenue kept: the smaller of the two"),
         ("period_amount", "total of the customer's charges in the period, or of its "
                           "subscriptions' monthly amounts in force at the period's end "
                           "(run rate) or shares of the period (recognized), before the "
                           "zero/negative rule; NULL when it has none"),
         ("counted_as_zero", "1 when period_amount is zero or negative and counts as no "
                             "revenue, else 0")),
        personal_data=True, enabled=lambda spec: spec.revenue is not None, reads="revenue"),
    View(
        "revenue_accounting",
        "One row per period from the first period with revenue data to the last, empty "
        "periods included: recurring revenue split into its components, with customer counts "
        "and ratios. Not revenue recognised under an accounting standard: reconcile with "
        "finance before reporting outside the company.",
        (("period_start", "first day of the period (DATE)"),
         ("revenue", "revenue counted in the period (DECIMAL, the amount's scale)"),
         ("previous_revenue", "revenue counted in the previous period"),
         ("new_revenue", "revenue of customers paying for the first time"),
         ("expansion_revenue", "growth of customers paying more than in the previous period"),
         ("resurrected_revenue", "revenue of customers paying again after a gap"),
         ("contraction_revenue", "shrinkage of customers paying less than in the previous "
                                 "period (still paying)"),
         ("churned_revenue", "previous revenue of customers who stopped paying"),
         ("retained_revenue", "the part of previous revenue kept: per customer the smaller of "
                              "this and the previous period's revenue"),
         ("customers", "customers with revenue in the period"),
         ("previous_customers", "customers with revenue in the previous period"),
         ("new_customers", "customers behind new_revenue"),
         ("expansion_customers", "customers behind expansion_revenue"),
         ("resurrected_customers", "customers behind resurrected_revenue"),
         ("contraction_customers", "customers behind contraction_revenue"),
         ("churned_customers", "customers behind churned_revenue"),
         ("retained_customers", "customers with revenue in this and the previous period "
                                "(expansion, contraction or flat)"),
         ("flat_customers", "customers paying exactly what they paid in the previous period"),
         ("quick_ratio", "(new + resurrected + expansion) / (churned + contraction); NULL "
                         "when that is 0"),
         ("gross_revenue_retention", "(previous - churned - contraction) / previous; NULL "
                                     "without previous revenue"),
         ("net_revenue_retention", "(previous - churned - contraction + expansion) / previous; "
                                   "NULL without previous revenue"),
         ("zeroed_customers", "customers whose period total is zero or negative, counted as "
                              "no revenue"),
         ("zeroed_amount", "the sum of those totals (zero or negative)"),
         ("amount_total", "total of every customer's period total: revenue + zeroed_amount"),
         ("period_status", "'in_progress' for a last period the data does not cover to its "
                           "end, else 'complete'"),
         ("period_key", "integer period index")),
        depends=("customer_revenue", "revenue_source_summary"),
        enabled=lambda spec: spec.revenue is not None, reads="revenue"),
    View(
        "cohort_retention",
        "One row per cohort (users by first active period) and age, from age 0 to the last "
        "period with data, zero rows included: a full triangle.",
        (("cohort_start", "first day of the cohort's period (DATE): the users' first active "
                          "period"),
         ("age", "periods since the cohort period: 0, 1, 2, ..."),
         ("period_start", "first day of the period the row counts (DATE)"),
         ("cohort_users", "users whose first active period is the cohort period"),
         ("active_users", "of those, users active in the period"),
         ("retention_rate", "active_users / cohort_users (1.0 at age 0)"),
         ("cohort_key", "integer period index of the cohort period"),
         ("period_key", "integer period index of the period")),
        enabled=lambda spec: spec.cohorts and spec.activity is not None,
        option="cohorts"),
    View(
        "engagement_depth",
        "One row per period and number of distinct active days a user can have in it (1 at "
        "day grain, 1 to 7 weekly, up to 31 monthly, 92 quarterly, 366 yearly), zero rows and "
        "empty periods included.",
        (("period_start", "first day of the period (DATE)"),
         ("active_days", "a number of distinct active days in the period"),
         ("users", "users active on exactly that many days of the period"),
         ("share_of_active_users", "users / period_active_users; NULL in an empty period"),
         ("daily_to_period_ratio", "average daily active users over the observed days / "
                                   "period_active_users; NULL in an empty period"),
         ("period_active_users", "users active in the period"),
         ("observed_days", "days of the period up to the newest activity date (the whole "
                           "period except the last)"),
         ("period_status", "'in_progress' for a last period the data does not cover to its "
                           "end, else 'complete'"),
         ("period_key", "integer period index")),
        enabled=lambda spec: spec.engagement and spec.activity is not None,
        option="engagement"),
    View(
        "trailing_activity",
        "One row per day, from the first to the last day with activity, and window length "
        "from `trailing_windows`: users active in the window of N days ending that day, "
        "accounted against the window of N days before it.",
        (("day", "the window's last day (DATE)"),
         ("window_days", "window length N in days"),
         ("active_users", "users active on any of the N days ending on `day`"),
         ("previous_active_users", "users active in the previous window (the N days before)"),
         ("new_users", "active users whose first active day is in the window"),
         ("retained_users", "users active in this window and the previous one"),
         ("resurrected_users", "active users not active in the previous window but before it"),
         ("churned_users", "users active in the previous window but not in this one"),
         ("quick_ratio", "(new + resurrected) / churned; NULL when churned is 0"),
         ("day_key", "integer day index (days since 1970-01-05)")),
        enabled=lambda spec: bool(spec.trailing_windows) and spec.activity is not None,
        option="trailing_windows"),
    View(
        "revenue_cohorts",
        "One row per cohort of customers (by first period with revenue) and age, from age 0 "
        "to the last period of revenue data, zero rows included.",
        (("cohort_start", "first day of the cohort's period (DATE): the customers' first "
                          "period with revenue"),
         ("age", "periods since the cohort period: 0, 1, 2, ..."),
         ("period_start", "first day of the period the row counts (DATE)"),
         ("cohort_customers", "customers whose first period with revenue is the cohort period"),
         ("paying_customers", "of those, customers with revenue in the period"),
         ("revenue", "the cohort's revenue in the period (DECIMAL, the amount's scale)"),
         ("cumulative_revenue", "the cohort's revenue from age 0 to this age"),
         ("net_revenue_retention", "revenue / the cohort's revenue at age 0 (1.0 at age 0)"),
         ("cohort_key", "integer period index of the cohort period"),
         ("period_key", "integer period index of the period")),
        depends=("customer_revenue", "revenue_source_summary"),
        enabled=lambda spec: spec.cohorts and spec.revenue is not None,
        reads="revenue", option="cohorts"),
)

# ---------------------------------------------------------------- segmented views
# Each segmented view is its base view split by segment value: the same columns after
# `segment` and `segment_value`, derived from the base row so that the two cannot drift.

SEGMENT_COLUMNS = (
    ("segment", "the segment's name, as written in the spec"),
    ("segment_value", "the segment's value as text (the engine's own spelling of it); NULL "
                      "is a group of its own"),
)
EVENT_NOTE = ("For a `kind: event` segment a user is counted in every value the user was "
              "active with, so the values' counts need not add up to the totals.")


def _segmented(base: View, summary: str, enabled: Callable[[Spec], bool]) -> View:
    note = f" {EVENT_NOTE}" if base.reads == "activity" else ""
    return View(f"{base.name}_by_segment", summary + note, SEGMENT_COLUMNS + base.columns,
                depends=base.depends, reads=base.reads,
                personal_data=base.personal_data, enabled=enabled, option="segments")


_BASE = {view.name: view for view in VIEWS}


def _splits_activity(spec: Spec) -> bool:
    return spec.activity is not None and any(s.splits_activity for s in spec.segments)


def _splits_revenue(spec: Spec) -> bool:
    return spec.revenue is not None and any(s.customer_key for s in spec.segments)


SEGMENTED_VIEWS: tuple[View, ...] = (
    _segmented(_BASE["growth_accounting"],
               "growth_accounting per segment and value: one row per segment, value and "
               "period of the totals' calendar, empty periods included.",
               _splits_activity),
    _segmented(_BASE["user_states"],
               "user_states per segment and value: one row per segment, value, user and "
               "period in which the user is new, retained, resurrected or churned in that "
               "value.",
               _splits_activity),
    _segmented(_BASE["cohort_retention"],
               "cohort_retention per segment and value: cohorts of the users by their first "
               "active period in the value, every age up to the last period with data.",
               lambda spec: spec.cohorts and _splits_activity(spec)),
    _segmented(_BASE["revenue_accounting"],
               "revenue_accounting per value of each segment with `customer_key`: one row per "
               "segment, value and period of the totals' calendar, empty periods included. "
               "Each customer has one value, so the values add up to revenue_accounting.",
               _splits_revenue),
)

VIEWS = VIEWS + SEGMENTED_VIEWS
VIEWS_BY_NAME = {view.name: view for view in VIEWS}


def segment_view_columns() -> dict[str, str]:
    """Every column of a segmented view (lower case) -> the first view holding it: a
    segment's name may not be one of them."""
    found: dict[str, str] = {}
    for view in SEGMENTED_VIEWS:
        for column in view.column_names:
            found.setdefault(column.lower(), view.name)
    return found


def planned_views(spec: Spec) -> list[View]:
    """The views a spec enables, each after the views it depends on."""
    chosen = [view for view in VIEWS if view.enabled(spec)]
    ordered: list[View] = []
    done: set[str] = set()

    def visit(view: View) -> None:
        if view.name in done:
            return
        for name in view.depends:
            visit(VIEWS_BY_NAME[name])
        done.add(view.name)
        ordered.append(view)

    for view in chosen:
        visit(view)
    return ordered


def planned(spec: Spec) -> list[tuple[Spec, View]]:
    """(part, view) for every view a spec creates: the spec's own views, then each
    definition's (``Spec.parts``); a view's name is its part's prefix and its own name."""
    return [(part, view) for part in spec.parts() for view in planned_views(part)]
