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
        "filtered out by `where`, and counted as activity.",
        (("source_rows", "rows in the activity table"),
         ("null_user_rows", "rows left out because the user key is NULL"),
         ("null_timestamp_rows", "rows with a user but a NULL timestamp, left out"),
         ("filtered_out_rows", "rows with user and timestamp that `where` does not keep"),
         ("counted_rows", "rows counted as activity"))),
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
        personal_data=True),
    View(
        "user_states",
        "One row per user and period in which the user is new, retained, resurrected or churned.",
        (("user_id", "the user key"),
         ("period_key", "integer period index"),
         ("period_start", "first day of the period (DATE)"),
         ("state", "new, retained, resurrected or churned")),
        depends=("user_activity",), personal_data=True),
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
        depends=("user_states", "user_activity")),
)

VIEWS_BY_NAME = {view.name: view for view in VIEWS}


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
