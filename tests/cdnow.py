"""Loader for the CDNOW purchase log shipped inside the ``lifetimes`` package.

The file is found through the package's location on disk; the package
itself is never imported. File format (checked by reading the file): a
header line ``customer_id date number_of_cds dollar_value``, then one
purchase per line as whitespace-separated columns: zero-padded customer
id, date as YYYYMMDD, number of CDs, dollar value with two decimals.
Lines end with CRLF.
"""

from __future__ import annotations

import importlib.util
from datetime import date
from decimal import Decimal
from pathlib import Path

HEADER = ["customer_id", "date", "number_of_cds", "dollar_value"]
_INSTALL_HINT = "the CDNOW test data needs the lifetimes package: pip install --no-deps lifetimes"


def cdnow_path():
    """Return the path of ``datasets/CDNOW_master.txt`` in the installed lifetimes package."""
    spec = importlib.util.find_spec("lifetimes")
    if spec is None or not spec.submodule_search_locations:
        raise RuntimeError(_INSTALL_HINT)
    for folder in spec.submodule_search_locations:
        path = Path(folder) / "datasets" / "CDNOW_master.txt"
        if path.is_file():
            return path
    raise RuntimeError(f"CDNOW_master.txt not found in the lifetimes package; {_INSTALL_HINT}")


def _parse_line(line, number):
    """Parse one purchase line into (customer_id, date, quantity, dollar value)."""
    fields = line.split()
    if len(fields) != 4:
        raise ValueError(f"line {number}: expected 4 columns, got {len(fields)}: {line!r}")
    customer, day, quantity, value = fields
    if len(day) != 8 or not day.isdigit():
        raise ValueError(f"line {number}: date {day!r} is not YYYYMMDD")
    purchased = date(int(day[0:4]), int(day[4:6]), int(day[6:8]))
    return int(customer), purchased, int(quantity), Decimal(value)


def load_cdnow():
    """Return the CDNOW purchases as ``(customer_id, date, quantity, Decimal dollar value)``.

    Values are exactly as in the file; blank lines are skipped.
    """
    rows = []
    with cdnow_path().open(encoding="ascii") as f:
        header = f.readline().split()
        if header != HEADER:
            raise ValueError(f"unexpected CDNOW header {header}; expected {HEADER}")
        for number, line in enumerate(f, start=2):
            if line.strip():
                rows.append(_parse_line(line, number))
    return rows
