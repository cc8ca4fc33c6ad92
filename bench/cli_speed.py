"""How long `sqlgen build --dialect all --jobs 1` and `--check` take for the README's spec.

    .venv/bin/python bench/cli_speed.py [runs]

Each figure is the fastest of ``runs`` (default 7) whole commands in a fresh process
(interpreter start and imports included), in a temporary folder; the fastest is the one
least disturbed by other work on a shared machine. Also prints the import time alone.
"""

from __future__ import annotations

import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def readme_spec() -> str:
    text = (ROOT / "README.md").read_text()
    return text.split("## The spec", 1)[1].split("```yaml\n", 1)[1].split("```", 1)[0]


def fastest(argv: list[str], runs: int, cwd: Path, before=None) -> float:
    best = float("inf")
    for _ in range(runs):
        if before:
            before()
        start = time.perf_counter()
        subprocess.run(argv, cwd=cwd, check=False, capture_output=True)
        best = min(best, time.perf_counter() - start)
    return best


def main() -> None:
    runs = int(sys.argv[1]) if len(sys.argv) > 1 else 7
    folder = Path(tempfile.mkdtemp(prefix="sqlgen-speed-"))
    try:
        (folder / "growth.yml").write_text(readme_spec())
        cli = [sys.executable, "-m", "sqlgen", "build", "growth.yml", "--dialect", "all",
               "--jobs", "1", "--out", "out"]
        imports = fastest([sys.executable, "-c", "import sqlgen.cli"], runs, folder)
        build = fastest(cli, runs, folder,
                        before=lambda: shutil.rmtree(folder / "out", ignore_errors=True))
        check = fastest(cli + ["--check"], runs, folder)
        print(f"import sqlgen.cli: {imports:.2f} s; build --dialect all --jobs 1: "
              f"{build:.2f} s; build --check: {check:.2f} s (fastest of {runs})")
    finally:
        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
