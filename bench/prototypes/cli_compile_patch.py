"""Prototype of a faster `sqlgen build --dialect all`: three patches applied from outside.

    .venv/bin/python bench/prototypes/cli_compile_patch.py

1. sqlglot's ``Expression.transform`` deep-copies the whole tree before every rewrite
   (``copy=True`` by default); the compiler's trees are fresh, so the rewrites can run in
   place (``copy=False``).
2. Each view's rendered SQL is the same for every target (templates never branch on the
   target), yet it is parsed once per target; parse it once and copy the tree per target.
3. ``Expression.sql`` copies the tree once more before generating (``copy=True``); the
   compiler discards the tree afterwards, so ``node.sql(..., copy=False)`` in
   ``compiler._generate`` is enough.

Prints the in-process time of compiling every view for every dialect before and after
(interleaved, median of 5) and checks that every generated file is byte-identical.
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import generated  # noqa: E402
from sqlglot import exp  # noqa: E402

from sqlgen import SqlgenError, compiler, parse_spec  # noqa: E402
from sqlgen.dialects import TARGETS  # noqa: E402

ORIGINAL_TRANSFORM = exp.Expression.transform
ORIGINAL_PARSE = compiler.parse
ORIGINAL_SQL = exp.Expression.sql


def build_all(spec) -> dict[str, dict[str, str] | str]:
    """Every file for every target, as `sqlgen build --dialect all` renders them (or the
    error of a target that cannot be built in this checkout)."""
    found: dict[str, dict[str, str] | str] = {}
    for name in TARGETS:
        try:
            found[name] = compiler.render_files(spec, name)
        except SqlgenError as err:
            found[name] = f"error: {err}"
    return found


def patched(on: bool) -> None:
    """Switch the three patches on or off."""
    if not on:
        exp.Expression.transform = ORIGINAL_TRANSFORM
        exp.Expression.sql = ORIGINAL_SQL
        compiler.parse = ORIGINAL_PARSE
        return
    cache: dict[str, exp.Expression] = {}

    def transform(self, fun, *args, copy=True, **kwargs):
        return ORIGINAL_TRANSFORM(self, fun, *args, copy=False, **kwargs)

    def parse(sql: str) -> exp.Expression:
        if sql not in cache:
            cache[sql] = ORIGINAL_PARSE(sql)
        return cache[sql].copy()

    def sql(self, dialect=None, **opts):
        return ORIGINAL_SQL(self, dialect, copy=False, **opts)

    exp.Expression.transform = transform
    exp.Expression.sql = sql
    compiler.parse = parse


def main() -> int:
    spec = parse_spec(generated.spec_text("month"), "spec.yml")
    times = {False: [], True: []}
    outputs = {}
    for _ in range(5):
        for on in (False, True):
            patched(on)
            try:
                start = time.perf_counter()
                outputs[on] = build_all(spec)
                times[on].append(time.perf_counter() - start)
            finally:
                patched(False)
    same = outputs[False] == outputs[True]
    before, after = (statistics.median(times[k]) for k in (False, True))
    built = {k: v for k, v in outputs[False].items() if isinstance(v, dict)}
    files = sum(len(v) for v in built.values())
    print(f"{files} files for {len(built)} of {len(TARGETS)} targets; byte-identical: {same}")
    for name, value in outputs[False].items():
        if isinstance(value, str):
            print(f"  not built: {name}: {value}")
    print(f"compile, as today: {before:.3f} s; with the patches: {after:.3f} s "
          f"({before / after:.1f}x faster)")
    return 0 if same else 1


if __name__ == "__main__":
    sys.exit(main())
