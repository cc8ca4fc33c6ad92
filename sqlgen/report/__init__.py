"""``sqlgen report``: run a spec's views on a source and write a self-contained page of
charts (and a PNG per chart). Needs the ``report`` extra (Altair, vl-convert, tqdm).

Stages: ``run`` (views created in a rolled-back transaction, aggregate rows read),
``charts`` (one Vega-Lite chart per view and measure), ``page`` (sections, HTML, PNGs).
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

from ..schema import redact
from ..spec import Spec
from .page import Report, write_report
from .run import Rows, run_report_views

__all__ = ["Report", "Rows", "make_report", "run_report_views"]


def make_report(spec: Spec, source: str, out: Path, progress: bool | None = None,
                now: dt.datetime | None = None, pngs: bool = True) -> Report:
    """Run the views of ``spec`` on ``source`` and write the page to ``out`` (and a PNG
    per chart to ``<out stem>-charts/`` unless ``pngs`` is false)."""
    from .charts import _alt

    _alt()  # the extra is missing: say so before running anything
    found = run_report_views(spec, source, progress)
    return write_report(spec, source, found, out, redact(source), now, pngs)
