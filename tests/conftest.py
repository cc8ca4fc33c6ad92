"""Shared test setup: engines started once per session, golden-file updates, hypothesis."""

from __future__ import annotations

import os

import pytest
from hypothesis import HealthCheck, settings

from engines import ENGINE_NAMES, EngineUnavailable, start_engine

settings.register_profile(
    "sqlgen", deadline=None, derandomize=True, print_blob=True,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
settings.load_profile("sqlgen")

# Targets each engine executes; the others are generated and checked without an engine.
ENGINE_TARGETS = {"duckdb": ("duckdb",), "postgres": ("postgres",), "sqlite": ("sqlite",),
                  "mysql": ("mysql",), "clickhouse": ("clickhouse",),
                  "spark": ("spark", "databricks")}


# Hypothesis examples per engine for the property tests: each example loads a table and
# creates views, so the slow engines get fewer (every example is still compared row by row).
# (Halved when the suite outgrew its CI budget: the examples are derandomized, so every run
# checks the same ones; DuckDB, the fastest, keeps the most.)
HYPOTHESIS_EXAMPLES = {"duckdb": 20, "sqlite": 8, "postgres": 8, "clickhouse": 5,
                       "mysql": 4, "spark": 2}

# Engines that load the CDNOW purchase log (about 70,000 rows, tests/cdnow.py) quickly; the
# open-dataset checks run there. The other engines are compared with the same plain-Python
# references on the fixtures and on generated data, which is where engines differ.
BULK_ENGINES = ("duckdb", "postgres", "clickhouse")


def selected_engines() -> list[str]:
    """Engines to run: SQLGEN_ENGINES=duckdb,postgres narrows the set; default all."""
    wanted = os.environ.get("SQLGEN_ENGINES", "")
    names = [n.strip() for n in wanted.split(",") if n.strip()] or list(ENGINE_NAMES)
    return [n for n in ENGINE_NAMES if n in names]


def engine_target_pairs(only: tuple[str, ...] | None = None, every_target: bool = False) -> list:
    """(engine, target) parameters; each engine's tests share one xdist worker.

    By default one target per engine; ``every_target=True`` adds the second target of a
    shared engine (databricks on Spark). The core growth matrix in test_views.py runs both;
    the other suites run spark only, which keeps the Spark share of CI within budget (the
    databricks spelling of the same constructs is pinned by golden files and re-parsed).
    """
    return [pytest.param(e, t, id=f"{e}-{t}")
            for e in selected_engines() if only is None or e in only
            for t in ENGINE_TARGETS[e][:None if every_target else 1]]


# Engines whose start is costly (a JVM; a database server with its time zone tables): all
# their tests share one worker, so each starts once per run. The others start in a few
# hundred milliseconds and are grouped per file, so their tests spread over both workers.
ONE_WORKER_ENGINES = ("spark", "mysql")


def _engine_of(item):
    params = getattr(item, "callspec", None)
    return params.params.get("engine_name") if params else None


def engine_group(engine: str, module: str) -> str:
    """The xdist group of one engine's tests in one test module."""
    return engine if engine in ONE_WORKER_ENGINES else f"{engine}-{module}"


# The grain matrices of the suites beyond the core growth matrix (test_views.py, every
# grain on every engine, the time-zone fixtures at day grain included) leave out, on the
# two slowest engines, the grains below: Spark keeps Sunday weeks and months. A fixture
# at one grain costs Spark 6-18 s (the JVM plans and runs every view), and MariaDB 30-45 s at day
# grain for the revenue fixtures (two years of days), against about a second elsewhere;
# their share decides whether CI fits its budget. What is left out shares the templates and
# the engine's spelling of what is kept: a Monday week differs from a Sunday week only by
# its offset, a quarter or a year from a month only by its step of months, and a day is the
# day family that weeks run in. Golden files pin every target's spelling at every grain.
GRAINS_LEFT_OUT = {"spark": {("day", "monday"), ("week", "monday"), ("quarter", "monday"),
                             ("year", "monday")},
                   "mysql": {("day", "monday")}}
FULL_GRAIN_MODULES = ("test_views",)


def _left_out(item, engine: str) -> bool:
    """Whether a test is at a grain its engine leaves out (GRAINS_LEFT_OUT)."""
    params = item.callspec.params
    if "grain" not in params or item.module.__name__ in FULL_GRAIN_MODULES:
        return False
    return (params["grain"], params.get("week_start")) in GRAINS_LEFT_OUT.get(engine, ())


@pytest.hookimpl(tryfirst=True)  # before xdist's loadgroup reads the marks
def pytest_collection_modifyitems(config, items):
    """With xdist's loadgroup, keep one engine's tests on one worker (see engine_group);
    leave out the grains an engine does not run (GRAINS_LEFT_OUT)."""
    left_out = [item for item in items if isinstance(_engine_of(item), str)
                and _left_out(item, _engine_of(item))]
    if left_out:
        config.hook.pytest_deselected(items=left_out)
        dropped = set(map(id, left_out))
        items[:] = [item for item in items if id(item) not in dropped]
    for item in items:
        engine = _engine_of(item)
        if isinstance(engine, str):   # not the placeholder of an empty engine list
            item.add_marker(pytest.mark.xdist_group(engine_group(engine, item.module.__name__)))
            item.user_properties.append(("engine", engine))   # for the time summary below


def pytest_collection_finish(session):
    """Fail loudly when the engine grouping above is silently lost (pytest 9.2 moved the
    node id xdist 3.8 rewrites for loadgroup): every engine would then start on both
    workers, two Spark JVMs would share two cores and CI would run past its budget."""
    if not getattr(session.config.option, "loadgroup", False):
        return
    lost = [item.nodeid for item in session.items
            if item.get_closest_marker("xdist_group") and "@" not in item.nodeid]
    if lost:
        raise pytest.UsageError(
            f"xdist loadgroup ignored the engine groups ({lost[0]} has no @group suffix): "
            "use the pytest and pytest-xdist versions pinned in pyproject.toml")

def pytest_addoption(parser):
    parser.addoption("--update-golden", action="store_true",
                     help="rewrite the golden SQL files from the current generator")


_STARTED: dict[str, object] = {}


@pytest.fixture(scope="session")
def engines():
    """Start engines lazily, once per session; stop them all at the end."""
    def get(name: str):
        if name not in _STARTED:
            try:
                _STARTED[name] = start_engine(name)
            except EngineUnavailable as err:
                _STARTED[name] = err
        found = _STARTED[name]
        if isinstance(found, EngineUnavailable):
            if os.environ.get("CI") == "true":
                pytest.fail(f"engine {name} did not start in CI: {found}")
            pytest.skip(f"engine {name} unavailable: {found}")
        return found
    yield get
    for found in _STARTED.values():
        if not isinstance(found, EngineUnavailable):
            found.close()
    _STARTED.clear()


# ---------------------------------------------------------------- time per engine and worker
# Printed at the end of every run (CI included), so that the next trim of the suite's time
# starts from where the time goes rather than from a guess.
_SPENT: dict[tuple[str, str], float] = {}


def pytest_runtest_logreport(report):
    node = getattr(report, "node", None)
    worker = getattr(getattr(node, "gateway", None), "id", "main")
    engine = dict(report.user_properties).get("engine", "no engine")
    key = (worker, engine)
    _SPENT[key] = _SPENT.get(key, 0.0) + report.duration


def pytest_terminal_summary(terminalreporter):
    if not _SPENT:
        return
    write = terminalreporter.write_line
    terminalreporter.section("time per worker and engine (s, setup + call + teardown)")
    for worker in sorted({w for w, _ in _SPENT}):
        parts = sorted(((e, t) for (w, e), t in _SPENT.items() if w == worker),
                       key=lambda item: -item[1])
        total = sum(t for _, t in parts)
        write(f"{worker}: {total:.0f}  " + "  ".join(f"{e} {t:.0f}" for e, t in parts))
