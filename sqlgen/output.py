"""Write generated files, or compare them with what is on disk (``--check``).

Nothing is half-written: every file is generated in memory first, every conflict in every
folder is found before the first write, and each file is replaced atomically. A file sqlgen
did not generate is never overwritten or removed.

Each folder also gets a manifest (``.sqlgen-manifest``): the inputs of the build that wrote
it (sqlgen version, target, a hash of the spec, a hash of the generator) and a SHA-256 of
every file it wrote. A folder whose manifest names the current inputs and whose files still
have those hashes holds exactly what a build would write now (output is deterministic), so
``--check`` answers without compiling; anything else falls back to a full compile and diff.
"""

from __future__ import annotations

import difflib
import hashlib
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path

from .compiler import HEADER_MARK
from .errors import OutputError

MANIFEST = ".sqlgen-manifest"
MANIFEST_HEAD = (
    "# Written by sqlgen build: the inputs of the build that wrote this folder and a SHA-256",
    "# of each file it wrote, so that `sqlgen build --check` can tell an up-to-date folder",
    "# without compiling. Do not edit; any mismatch only makes the check compile in full.",
)


def _first_line(path: Path) -> str | None:
    """The first line of a text file without its newline; None if it cannot be read."""
    try:
        with path.open("r", encoding="utf-8") as handle:
            return handle.readline().rstrip("\n")
    except (OSError, UnicodeDecodeError):
        return None


def _is_generated(path: Path) -> bool:
    return (_first_line(path) or "").startswith(HEADER_MARK)


def _is_manifest(path: Path) -> bool:
    return _first_line(path) == MANIFEST_HEAD[0]


def _stale(folder: Path, names) -> list[Path]:
    """Files sqlgen generated in ``folder`` that are not among ``names``."""
    if not folder.is_dir():
        return []
    return sorted(p for p in folder.glob("*.sql")
                  if p.name not in names and _is_generated(p))


def _conflicts(folder: Path, files: dict[str, str], manifest: bool) -> list[Path]:
    found = [folder / name for name in sorted(files)
             if (folder / name).exists() and not _is_generated(folder / name)]
    if manifest and (folder / MANIFEST).exists() and not _is_manifest(folder / MANIFEST):
        found.append(folder / MANIFEST)
    return found


def _not_a_folder(folder: Path) -> Path | None:
    """The path that keeps ``folder`` from being a folder: itself or an ancestor that is a
    file. None when the folder exists or can be created."""
    for path in (folder, *folder.parents):
        if path.exists():
            return None if path.is_dir() else path
    return None


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def manifest_text(inputs: list[str], files: dict[str, str]) -> str:
    """The manifest of a folder holding ``files``, built from ``inputs``."""
    lines = [*MANIFEST_HEAD, *inputs]
    lines += [f"file {name} {_sha256(text.encode('utf-8'))}" for name, text in files.items()]
    return "\n".join(lines) + "\n"


def is_up_to_date(folder: Path, inputs: list[str], names: list[str]) -> bool:
    """Whether ``folder`` holds exactly what a build from ``inputs`` writes, without one.

    True only if the manifest names these inputs and exactly these files, every file still
    has the hash recorded when it was written, and no other generated file is left over.
    """
    try:
        lines = (folder / MANIFEST).read_text(encoding="utf-8").splitlines()
    except (OSError, UnicodeDecodeError):
        return False
    head = [*MANIFEST_HEAD, *inputs]
    if lines[:len(head)] != head:
        return False
    recorded = {}
    for line in lines[len(head):]:
        kind, _, rest = line.partition(" ")
        name, _, digest = rest.rpartition(" ")
        if kind != "file" or not name or name in recorded:
            return False
        recorded[name] = digest
    if sorted(recorded) != sorted(names):
        return False
    for name in names:
        try:
            data = (folder / name).read_bytes()
        except OSError:
            return False
        if _sha256(data) != recorded[name]:
            return False
    return not _stale(folder, recorded)


@dataclass(frozen=True)
class WriteResult:
    written: list[str]
    unchanged: list[str]
    removed: list[str]


def write_folders(jobs: list[tuple[Path, dict[str, str], list[str] | None]]) -> list[WriteResult]:
    """Write several folders: (folder, files, build inputs for the manifest or None).

    Every folder is checked before the first file of any of them is written.
    """
    problems = []
    for folder, files, inputs in jobs:
        blocker = _not_a_folder(folder)
        if blocker is not None:
            problems.append(f"{blocker} exists and is not a folder")
            continue
        conflicts = _conflicts(folder, files, inputs is not None)
        if conflicts:
            shown = ", ".join(str(p) for p in conflicts)
            problems.append(f"{shown}: not generated by sqlgen, so not overwritten; move it "
                            "away or choose another folder with --out")
    if problems:
        raise OutputError("\n".join(dict.fromkeys(problems)))  # each blocker once
    return [_write(folder, files, inputs) for folder, files, inputs in jobs]


def write_files(folder: Path, files: dict[str, str],
                inputs: list[str] | None = None) -> WriteResult:
    """Write every file atomically; remove sqlgen files no longer generated.

    With ``inputs`` (``compiler.build_inputs``) the folder's manifest is written last;
    without, an existing manifest is left as it is (``--check`` then finds its hashes do
    not match and compiles in full).
    """
    return write_folders([(folder, files, inputs)])[0]


def _write(folder: Path, files: dict[str, str], inputs: list[str] | None) -> WriteResult:
    try:
        folder.mkdir(parents=True, exist_ok=True)
        written, unchanged = [], []
        for name, text in files.items():
            (written if _write_if_changed(folder / name, text) else unchanged).append(name)
        removed = []
        for path in _stale(folder, files):
            path.unlink()
            removed.append(path.name)
        if inputs is not None:
            _write_if_changed(folder / MANIFEST, manifest_text(inputs, files))
    except OSError as err:
        where = err.filename or folder
        raise OutputError(f"{where}: cannot write: {err.strerror or err}") from None
    return WriteResult(written, unchanged, removed)


def _write_if_changed(path: Path, text: str) -> bool:
    """Replace the file atomically unless it already holds ``text``; whether it was written."""
    if path.exists() and path.read_text(encoding="utf-8") == text:
        return False
    _atomic_write(path, text)
    return True


def _atomic_write(path: Path, text: str) -> None:
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as handle:
            handle.write(text)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


def check_files(folder: Path, files: dict[str, str]) -> list[str]:
    """Unified diffs (and notes) for every file on disk that differs from ``files``."""
    problems = []
    for name, text in files.items():
        path = folder / name
        old = path.read_text(encoding="utf-8", errors="replace") if path.exists() else ""
        if old == text:
            continue
        label = f"{folder / name}" + ("" if path.exists() else " (missing)")
        diff = difflib.unified_diff(old.splitlines(keepends=True), text.splitlines(keepends=True),
                                    fromfile=f"{label} (on disk)",
                                    tofile=f"{folder / name} (from spec)")
        problems.append("".join(diff))
    for path in _stale(folder, files):
        problems.append(f"{path}: generated by sqlgen but no longer part of the spec's output\n")
    return problems
