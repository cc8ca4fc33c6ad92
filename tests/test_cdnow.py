"""External check: the CDNOW purchase log shipped in the `lifetimes` package.

Source: CDNOW_master.txt (69,659 purchases by 23,570 customers), as analysed in Fader,
Hardie & Lee (2005), "Counting Your Customers the Easy Way". All 23,570 customers made
their first purchase in the first quarter of 1997 (the paper's cohort; the count is from
memory and the file agrees), so monthly new_users must be 0 from April 1997 on.
"""

from __future__ import annotations

import datetime as dt

import pytest

import reference as ref
from cdnow import load_cdnow
from conftest import BULK_ENGINES, engine_target_pairs
from harness import run
from test_views import check_all


@pytest.fixture(scope="module")
def purchases():
    return [(str(customer), day) for customer, day, _cds, _dollars in load_cdnow()]


@pytest.mark.parametrize("engine_name,target", engine_target_pairs(only=BULK_ENGINES))
def test_cdnow_monthly_growth_accounting(engines, engine_name, target, purchases):
    results = run(engines(engine_name), target, purchases, kind="date", grain="month")
    check_all(results, purchases, "month", "monday")
    growth = sorted(results["growth_accounting"], key=lambda r: r["period_start"])
    assert len(growth) == 18  # January 1997 to June 1998
    assert sum(r["new_users"] for r in growth) == 23_570
    assert all(r["new_users"] == 0 for r in growth if r["period_start"] >= dt.date(1997, 4, 1))
    ref.assert_identities(growth)


@pytest.mark.parametrize("engine_name,target", engine_target_pairs(only=("duckdb",)))
@pytest.mark.parametrize("grain,week_start", [("week", "sunday"), ("quarter", "monday")])
def test_cdnow_other_grains(engines, engine_name, target, purchases, grain, week_start):
    results = run(engines(engine_name), target, purchases, kind="date", grain=grain,
                  week_start=week_start)
    check_all(results, purchases, grain, week_start)
