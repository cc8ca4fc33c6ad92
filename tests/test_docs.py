"""The reference docs are generated from the code's own tables and must be up to date."""

from __future__ import annotations

import pytest

from sqlgen.docgen import DOCS, documents


@pytest.mark.parametrize("name", sorted(documents()))
def test_generated_docs_are_current(name):
    on_disk = (DOCS / name).read_text(encoding="utf-8")
    assert on_disk == documents()[name], f"docs/{name} is stale: run python -m sqlgen.docgen"
