"""What each target supports: read by the compiler (to refuse) and by the docs (the matrix).

A target lists its gaps in ``Target.unsupported`` (feature -> reason); everything else it
supports, executed on a real engine in the tests when ``Target.engine`` is set.
"""

from __future__ import annotations

from .dialects import Target
from .errors import UnsupportedError
from .spec import Spec
from .views import VIEWS

OPTIONS = ("grain: week", "activity.timezone", "timestamp_type: timestamptz", "activity.where")
FEATURES: tuple[str, ...] = tuple(v.name for v in VIEWS) + OPTIONS


def support(target: Target, feature: str) -> tuple[str, str]:
    """(status, reason): status is executed, checked or unsupported."""
    reason = target.unsupported.get(feature, "")
    if reason:
        return "unsupported", reason
    return ("executed" if target.engine else "checked"), ""


def features_used(spec: Spec) -> list[tuple[str, str]]:
    """(feature, spec key) pairs a spec relies on."""
    used = []
    if spec.grain == "week":
        used.append(("grain: week", "grain"))
    if spec.activity.timezone:
        used.append(("activity.timezone", "activity.timezone"))
    if spec.activity.timestamp_type == "timestamptz":
        used.append(("timestamp_type: timestamptz", "activity.timestamp_type"))
    if spec.activity.where:
        used.append(("activity.where", "activity.where"))
    return used


def require_support(spec: Spec, target: Target, views: list[str]) -> None:
    """Raise UnsupportedError naming the dialect and spec key of the first gap."""
    for feature, key in features_used(spec) + [(v, f"view {v}") for v in views]:
        status, reason = support(target, feature)
        if status == "unsupported":
            raise UnsupportedError(target.name, key, reason)
