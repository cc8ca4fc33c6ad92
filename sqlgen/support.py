"""What each target supports: read by the compiler (to refuse) and by the docs (the matrix).

A target lists its gaps in ``Target.unsupported`` (feature -> reason); everything else it
supports, executed on a real engine in the tests when ``Target.engine`` is set.
"""

from __future__ import annotations

import datetime as dt

from sqlglot import exp
from sqlglot.errors import ErrorLevel, UnsupportedError as SqlglotUnsupported

from .dialects import Target, filter_feature, rewrites
from .errors import Gap, UnsupportedError
from .render import filter_tree
from .spec import Spec
from .views import VIEWS, VIEWS_BY_NAME

OPTIONS = ("grain: week", "activity.timezone", "timestamp_type: timestamptz", "activity.where",
           "revenue.timezone", "revenue.where", "shape: subscriptions", "qualified names",
           "valid range before 1970 or after 2105", "materialize: incremental")
FEATURES: tuple[str, ...] = tuple(v.name for v in VIEWS) + OPTIONS
# A revenue option needs what the activity option of the same kind needs, unless a target
# lists it separately.
SAME_AS = {"revenue.timezone": "activity.timezone", "revenue.where": "activity.where"}


def support(target: Target, feature: str) -> tuple[str, str]:
    """(status, reason): status is executed, checked or unsupported."""
    reason = (target.unsupported.get(feature, "")
              or target.unsupported.get(SAME_AS.get(feature, ""), ""))
    if reason:
        return "unsupported", reason
    executed = target.engine and (target.executed is None or feature in target.executed)
    return ("executed" if executed else "checked"), ""


def features_used(spec: Spec) -> list[tuple[str, str]]:
    """(feature, spec key) pairs a spec relies on."""
    used = []
    if spec.grain == "week":
        used.append(("grain: week", "grain"))
    activity = spec.activity
    if activity is not None and activity.timezone:
        used.append(("activity.timezone", "activity.timezone"))
    if activity is not None and activity.timestamp_type == "timestamptz":
        used.append(("timestamp_type: timestamptz", "activity.timestamp_type"))
    if activity is not None and activity.where:
        used.append(("activity.where", "activity.where"))
    if spec.output.schema:
        used.append(("qualified names", "output.schema"))
    for key, source in (("activity.table", activity), ("revenue.table", spec.revenue)):
        if source is not None and len(source.table) > 1:
            used.append(("qualified names", key))
    for segment in spec.segments:
        if segment.table is not None and len(segment.table) > 1:
            used.append(("qualified names", f"segments.{segment.name}.table"))
    return used + _revenue_features(spec) + _range_features(spec)


# A valid range inside these dates needs date types no wider than 1970 .. 2106 (the range
# check compares with its bounds two days wider).
RANGE_OPTION = "valid range before 1970 or after 2105"
NARROW_RANGE = (dt.date(1970, 1, 3), dt.date(2106, 1, 1))


def _range_features(spec: Spec) -> list[tuple[str, str]]:
    used = []
    for name, source in (("activity", spec.activity), ("revenue", spec.revenue)):
        if source is None:
            continue
        if source.valid_from < NARROW_RANGE[0]:
            used.append((RANGE_OPTION, f"{name}.valid_from"))
        if source.valid_until > NARROW_RANGE[1]:
            used.append((RANGE_OPTION, f"{name}.valid_until"))
    if spec.output.materialize == "incremental":
        used.append(("materialize: incremental", "output.materialize"))
    return used


def _revenue_features(spec: Spec) -> list[tuple[str, str]]:
    revenue = spec.revenue
    if revenue is None:
        return []
    used = []
    if revenue.timezone:
        used.append(("revenue.timezone", "revenue.timezone"))
    if revenue.timestamp_type == "timestamptz":
        used.append(("timestamp_type: timestamptz", "revenue.timestamp_type"))
    if revenue.where:
        used.append(("revenue.where", "revenue.where"))
    if revenue.shape == "subscriptions":
        used.append(("shape: subscriptions", "revenue.shape"))
    return used


def gaps(spec: Spec, target: Target, views: list[str]) -> list[Gap]:
    """Every feature of the spec the target cannot express, each with the spec key that
    asks for it and the ``file:line:col`` of that key."""
    found = []
    for feature, key in features_used(spec) + [(v, f"view {v}") for v in views]:
        status, reason = support(target, feature)
        if status == "unsupported":
            found.append(Gap(target.name, key, reason, spec.where(spec_key(key)), spec_key(key)))
    for key, text in (("activity.where", spec.activity and spec.activity.where),
                      ("revenue.where", spec.revenue and spec.revenue.where)):
        if text:
            found += filter_gaps(spec, target, key, text)
    return found


def spec_key(key: str) -> str:
    """The spec key behind a refused feature: ``view cohort_retention`` -> ``cohorts``."""
    view = VIEWS_BY_NAME.get(key.removeprefix("view ")) if key.startswith("view ") else None
    return view.spec_key if view is not None else key


def spec_gaps(spec: Spec, target: Target) -> list[Gap]:
    """Every gap of a spec's views and of each definition's (``Spec.parts``), each once; a
    definition's gap names the definition's own key when the definition wrote it."""
    from dataclasses import replace

    from .views import planned_views

    found: list[Gap] = []
    for part in spec.parts():
        for gap in gaps(part, target, [v.name for v in planned_views(part)]):
            own = f"definitions.{part.definition}" + gap.spec_key[len("activity"):]
            if (part.definition and part.parent and gap.spec_key.startswith("activity")
                    and own in part.parent.positions):
                gap = replace(gap, spec_key=own)
            if gap not in found:
                found.append(gap)
    return found


def require_support(spec: Spec, target: Target, views: list[str]) -> None:
    """Raise UnsupportedError naming the dialect, spec key and place of every gap."""
    found = gaps(spec, target, views)
    if found:
        raise UnsupportedError.of(found)


def filter_gaps(spec: Spec, target: Target, key: str, text: str) -> list[Gap]:
    """What of a filter the target cannot express, located at the filter: an operation it
    lacks (``Target.filter_gaps``), or one sqlglot cannot spell for it."""
    tree = filter_tree(text, spec)
    found = []
    for node in tree.walk():
        reason = target.filter_gaps.get(filter_feature(node))
        if reason:
            found.append(Gap(target.name, filter_feature(node), reason, spec.where(key), key,
                             "express"))
    if found:
        return found
    for rewrite in rewrites(target):
        tree = rewrite(tree)
    try:
        exp.select("1").where(tree).sql(dialect=target.sqlglot_dialect, copy=False,
                                         unsupported_level=ErrorLevel.RAISE)
    except SqlglotUnsupported as err:
        return [Gap(target.name, str(err).strip().splitlines()[0], "", spec.where(key), key,
                    "express")]
    return []
