"""docs/api.md: every ```python block runs, in order, in one namespace, in an empty folder
(the asserts in the blocks check the results)."""

from __future__ import annotations

import re
from pathlib import Path

PAGE = Path(__file__).resolve().parent.parent / "docs" / "api.md"


def test_the_api_page_examples_run(tmp_path, monkeypatch):
    blocks = re.findall(r"```python\n(.*?)```", PAGE.read_text(), re.S)
    assert len(blocks) >= 5
    monkeypatch.chdir(tmp_path)
    namespace: dict = {}
    for number, block in enumerate(blocks, 1):
        exec(compile(block, f"docs/api.md block {number}", "exec"), namespace)  # noqa: S102
