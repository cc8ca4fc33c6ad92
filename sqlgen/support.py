"""What each target supports: read by the compiler (to refuse) and by the docs (the matrix).

A target lists its gaps in ``Target.unsupported`` (feature -> reason); everything else it
supports, executed on a real engine in the tests when ``Target.engine`` is set.
"""

from __future__ import annotations

from sqlglot import exp
from sqlglot.errors import ErrorLevel, UnsupportedError as SqlglotUnsupported

from .dialects import Target, filter_feature, rewrites
from .errors import UnsupportedError
from .render import filter_tree
from .spec import Spec
from .views import VIEWS

OPTIONS = ("grain: week", "activity.timezone", "timestamp_type: timestamptz", "activity.where",
           "revenue.timezone", "revenue.where", "shape: subscriptions", "qualified names")
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
    return used + _revenue_features(spec)


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


def require_support(spec: Spec, target: Target, views: list[str]) -> None:
    """Raise UnsupportedError naming the dialect and spec key of the first gap."""
    for feature, key in features_used(spec) + [(v, f"view {v}") for v in views]:
        status, reason = support(target, feature)
        if status == "unsupported":
            raise UnsupportedError(target.name, key, reason)
    for key, text in (("activity.where", spec.activity and spec.activity.where),
                      ("revenue.where", spec.revenue and spec.revenue.where)):
        if text:
            require_filter_support(spec, target, key, text)


def require_filter_support(spec: Spec, target: Target, key: str, text: str) -> None:
    """Raise UnsupportedError, located at the filter, for an operation the target lacks
    (``Target.filter_gaps``) or one sqlglot cannot spell for it."""
    tree = filter_tree(text, spec)
    for node in tree.walk():
        reason = target.filter_gaps.get(filter_feature(node))
        if reason:
            raise UnsupportedError(target.name, key, f"{filter_feature(node)}: {reason}",
                                   at=spec.located(key))
    for rewrite in rewrites(target):
        tree = rewrite(tree)
    try:
        exp.select("1").where(tree).sql(dialect=target.sqlglot_dialect, copy=False,
                                         unsupported_level=ErrorLevel.RAISE)
    except SqlglotUnsupported as err:
        raise UnsupportedError(target.name, key, str(err).strip().splitlines()[0],
                               at=spec.located(key)) from None
