"""Write generated files, or compare them with what is on disk (``--check``).

Nothing is half-written: every file is generated in memory first, every conflict in every
folder is found before the first write, and each file is replaced atomically (a temporary
file named ``.sqlgen-tmp-<pid>-*`` in the same folder, then a rename). A file sqlgen did not
generate is never overwritten, and only files the manifest lists are ever removed.

Each folder gets a manifest (``.sqlgen-manifest``) with one entry per spec whose files it
holds. A spec is named by its path relative to the folder (``../usd.yml`` for the default
``sql`` folder beside ``usd.yml``): no absolute path, and two specs of one name in different
folders stay apart. An entry holds the inputs of the build that wrote it (sqlgen version,
target, a hash of the spec, a hash of the generator) and a SHA-256 of every file it wrote.
A build of one spec keeps every other entry as it is and refuses to write a file another
spec owns. An entry whose inputs are the current ones and whose files still have those
hashes holds exactly what a build would write now (output is deterministic), so ``--check``
answers without compiling; anything else falls back to a full compile and diff.
"""

from __future__ import annotations

import contextlib
import difflib
import hashlib
import json
import os
import re
import stat
from dataclasses import dataclass, field
from pathlib import Path

try:
    import fcntl
except ImportError:  # not POSIX
    fcntl = None

from .comments import HEADER_MARK
from .errors import OutputError

MANIFEST = ".sqlgen-manifest"
MANIFEST_HEAD = (
    "# Written by sqlgen build: for each spec whose files this folder holds, the inputs of",
    "# the build that wrote them and a SHA-256 of each file, so that `sqlgen build --check`",
    "# can tell an up-to-date folder without compiling, and no build replaces or removes",
    "# another spec's files. Do not edit.",
)
# The first line of the manifest an earlier sqlgen wrote: one build's inputs, no spec named.
LEGACY_HEAD = ("# Written by sqlgen build: the inputs of the build that wrote this folder "
               "and a SHA-256")
TEMP_PREFIX = ".sqlgen-tmp-"
_TEMP = re.compile(r"\.sqlgen-tmp-(\d+)-[a-z0-9_]{8}")  # TEMP_PREFIX, pid, mkstemp's part
# Temporary files of the sqlgen before this one: ".<name>.<8 random characters>.tmp".
_LEGACY_TEMP = re.compile(r"\.(?:[A-Za-z0-9_]+\.sql|\.sqlgen-manifest)\.[a-z0-9_]{8}\.tmp")
_FILE_NAME = re.compile(r"[A-Za-z0-9_]+\.sql")  # every name sqlgen writes besides MANIFEST
_SHA256 = re.compile(r"[0-9a-f]{64}")
_OUT_HINT = "choose another folder with --out"


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _first_line(path: Path) -> bytes:
    """The first line of a file as bytes (b"" for a missing file, a folder or a pipe that
    would block the read): a header in UTF-8 is found even when a later byte is broken.
    Raises OSError for a file that exists but cannot be read."""
    if not path.is_file():
        return b""
    with path.open("rb") as handle:
        return handle.readline(4096).rstrip(b"\n")


def _is_generated(path: Path) -> bool:
    return _first_line(path).startswith(HEADER_MARK.encode())


def _looks_generated(path: Path) -> bool:
    """A plain file (no link) with sqlgen's header; False for one that cannot be read."""
    try:
        return not path.is_symlink() and _is_generated(path)
    except OSError:
        return False


def _is_manifest(path: Path) -> bool:
    return _first_line(path) in (MANIFEST_HEAD[0].encode(), LEGACY_HEAD.encode())


def spec_owner(spec_path: str | os.PathLike, folder: Path) -> str:
    """How the manifest of ``folder`` names a spec: its path relative to the folder, with
    ``/`` between parts (both resolved first, so the name does not depend on the working
    folder)."""
    spec, base = Path(spec_path).resolve(), folder.resolve()
    try:
        return Path(os.path.relpath(spec, base)).as_posix()
    except ValueError:  # another drive (Windows): no relative path exists
        return spec.name


# ---------------------------------------------------------------------------- manifest


@dataclass
class Entry:
    """One spec's part of a manifest: its build inputs and file name -> SHA-256."""

    inputs: list[str] = field(default_factory=list)
    files: dict[str, str] = field(default_factory=dict)


@dataclass
class Manifest:
    """A folder's manifest as read. ``entries`` maps spec names (``spec_owner``) to their
    entries; the key None holds the one entry of a manifest written before specs were
    named. ``problems`` lists lines that could not be read (they are ignored)."""

    path: Path
    entries: dict[str | None, Entry] = field(default_factory=dict)
    problems: list[str] = field(default_factory=list)

    def owner_of(self, name: str) -> str | None | bool:
        """The spec whose entry lists ``name``; False when none does."""
        for owner, entry in self.entries.items():
            if name in entry.files:
                return owner
        return False

    def take(self, owner: str, entry: Entry) -> None:
        """Make ``entry`` the one of spec ``owner``; its files leave other entries (a build
        writes a file another spec lists only once that file is gone), and entries left
        with no file go."""
        self.entries.pop(None, None)
        for other in list(self.entries):
            kept = {n: d for n, d in self.entries[other].files.items() if n not in entry.files}
            self.entries[other].files = kept
            if not kept and other != owner:
                del self.entries[other]
        self.entries[owner] = entry

    def text(self) -> str:
        """The manifest's content: entries in order of spec name, files in build order."""
        lines = list(MANIFEST_HEAD)
        for owner in sorted(o for o in self.entries if o is not None):
            entry = self.entries[owner]
            lines.append(f"owner {json.dumps(owner)}")
            lines += entry.inputs
            lines += [f"file {name} {digest}" for name, digest in entry.files.items()]
        return "\n".join(lines) + "\n"


def read_manifest(folder: Path) -> Manifest:
    """The manifest of ``folder``; an empty one when there is none. Raises OSError when it
    exists but cannot be read."""
    manifest = Manifest(folder / MANIFEST)
    try:
        data = manifest.path.read_bytes()
    except FileNotFoundError:
        return manifest
    try:
        lines = data.decode("utf-8").splitlines()
    except UnicodeDecodeError as err:
        manifest.problems.append(f"byte {err.start + 1} is not UTF-8")
        return manifest
    entry = None
    for number, line in enumerate(lines, 1):
        kind, _, rest = line.partition(" ")
        if line.startswith("#") or not line:
            continue
        if kind == "owner":
            entry = _owner_entry(manifest, rest, number)
        elif kind == "file":
            _file_line(manifest, entry, rest, number)
        elif entry is None and kind == "sqlgen" and None not in manifest.entries:
            entry = manifest.entries[None] = Entry([line])  # an earlier sqlgen: one unnamed build
        elif entry is not None:
            entry.inputs.append(line)
        else:
            manifest.problems.append(f"line {number} is neither an owner, an input nor a file")
    return manifest


def _owner_entry(manifest: Manifest, rest: str, number: int) -> Entry | None:
    try:
        owner = json.loads(rest)
    except ValueError:
        owner = None
    if not isinstance(owner, str) or not owner or owner in manifest.entries:
        manifest.problems.append(f"line {number} names no spec, or one named before")
        return None
    manifest.entries[owner] = Entry()
    return manifest.entries[owner]


def _file_line(manifest: Manifest, entry: Entry | None, rest: str, number: int) -> None:
    name, _, digest = rest.rpartition(" ")
    if (entry is None or not _FILE_NAME.fullmatch(name) or not _SHA256.fullmatch(digest)
            or manifest.owner_of(name) is not False):
        manifest.problems.append(f"line {number} is not a file of one spec with its SHA-256")
        return
    entry.files[name] = digest


def manifest_text(owner: str, inputs: list[str], files: dict[str, str]) -> str:
    """The manifest of a folder holding only one spec's ``files``, built from ``inputs``."""
    manifest = Manifest(Path(MANIFEST))
    manifest.entries[owner] = _entry(inputs, files)
    return manifest.text()


def _entry(inputs: list[str], files: dict[str, str]) -> Entry:
    return Entry(list(inputs), {name: _sha256(text.encode("utf-8"))
                                for name, text in files.items()})


def is_up_to_date(folder: Path, owner: str, inputs: list[str], names: list[str]) -> bool:
    """Whether ``folder`` holds exactly what a build of spec ``owner`` from ``inputs``
    writes, without one: its manifest entry names these inputs and exactly these files,
    and every file is still a plain file with the hash recorded when it was written."""
    try:
        manifest = read_manifest(folder)
        entry = manifest.entries.get(owner)
        if manifest.problems or entry is None or entry.inputs != inputs:
            return False
        if sorted(entry.files) != sorted(names):
            return False
        return all((folder / name).is_file() and not (folder / name).is_symlink()
                   and _sha256((folder / name).read_bytes()) == entry.files[name]
                   for name in names)
    except OSError:
        return False  # the full compile that follows says what cannot be read


# ------------------------------------------------------------------------------- plans


@dataclass
class Plan:
    """What a build of one spec would do in one folder, found before anything is written:
    ``refusals`` (each ``path: what; what to do``) stop every build; otherwise ``remove``
    are this spec's files it no longer generates, ``left_alone`` files that look generated
    but no spec owns (a user's copy, say), ``leftovers`` temporary files of a build that
    was killed."""

    folder: Path
    owner: str | None
    manifest: Manifest
    refusals: list[str] = field(default_factory=list)
    remove: list[Path] = field(default_factory=list)
    left_alone: list[Path] = field(default_factory=list)
    leftovers: list[Path] = field(default_factory=list)

    def notes(self) -> list[str]:
        """One line per file left alone, and one for unreadable manifest lines."""
        notes = [f"{path}: carries sqlgen's header but no spec in {MANIFEST} owns it, so it "
                 "was left alone; delete it yourself if it is not needed"
                 for path in self.left_alone]
        if self.manifest.problems:
            notes.append(f"{self.manifest.path}: {'; '.join(self.manifest.problems)}: "
                         "ignored, and rewritten by `sqlgen build`")
        return notes


def plan_folder(folder: Path, owner: str | None, inputs: list[str] | None,
                names: list[str], shown: str | None = None) -> Plan:
    """Check one folder for a build of spec ``owner`` (None: no manifest entry) writing
    ``names``; ``shown`` is how messages name that spec (default ``owner``). Never raises
    for a folder it cannot read: that becomes a refusal."""
    try:
        return _plan(folder, owner, inputs, names, shown or owner or "this build")
    except OSError as err:
        plan = Plan(folder, owner, Manifest(folder / MANIFEST))
        plan.refusals.append(_os_message(err, folder, "read"))
        return plan


def _plan(folder: Path, owner: str | None, inputs: list[str] | None, names: list[str],
          shown: str) -> Plan:
    blocker = _not_a_folder(folder)
    if blocker is not None:
        plan = Plan(folder, owner, Manifest(folder / MANIFEST))
        plan.refusals.append(f"{blocker}: exists and is not a folder; move it away or "
                             f"{_OUT_HINT}")
        return plan
    if not folder.exists():
        return Plan(folder, owner, Manifest(folder / MANIFEST))
    plan = Plan(folder, owner, _manifest_of(folder))
    if not plan.refusals and plan.manifest.path.exists() and not _is_manifest(plan.manifest.path):
        plan.refusals.append(_not_ours(plan.manifest.path))
        return plan
    _adopt_legacy(plan, inputs, shown)
    _adopt_renamed(plan, inputs)
    owned: dict[str, list[str]] = {}  # another spec -> its files this build would write
    for name in names:
        refusal = _refusal(plan, folder / name)
        if refusal is not None and refusal in plan.manifest.entries:
            owned.setdefault(refusal, []).append(str(folder / name))
        elif refusal:
            plan.refusals.append(refusal)
    for other, paths in owned.items():
        plan.refusals.append(_owned_message(plan, other, paths, shown))
    mine = plan.manifest.entries.get(owner, Entry()).files if owner is not None else {}
    for name in mine:
        path = folder / name
        if name not in names and _looks_generated(path):
            plan.remove.append(path)
    listed = {n for entry in plan.manifest.entries.values() for n in entry.files}
    plan.left_alone = [p for p in sorted(folder.glob("*.sql"))
                       if p.name not in listed and p.name not in names and _looks_generated(p)]
    plan.leftovers = _leftovers(folder)
    return plan


def _manifest_of(folder: Path) -> Manifest:
    path = folder / MANIFEST
    if path.is_symlink() or (path.exists() and not path.is_file()):
        raise _Refused(path)
    return read_manifest(folder)


class _Refused(OSError):
    """A manifest that is a link or a folder: reported like a file not generated by sqlgen."""


def _adopt_legacy(plan: Plan, inputs: list[str] | None, shown: str) -> None:
    """A manifest of an earlier sqlgen names no spec. Its files are taken as this spec's when its
    spec hash is this spec's, or when its files' headers name a spec file of this spec's
    name (the spec was edited since); otherwise the build is refused, since its files may
    be another spec's."""
    legacy = plan.manifest.entries.get(None)
    if legacy is None:
        return
    spec_line = next((line for line in inputs or [] if line.startswith("spec ")), None)
    named = _header_specs(plan.folder, legacy.files)
    mine = os.path.basename(plan.owner or "")
    if plan.owner is not None and (spec_line in legacy.inputs or named <= {mine}):
        del plan.manifest.entries[None]
        plan.manifest.entries.setdefault(plan.owner, Entry()).files.update(legacy.files)
        return
    who = ", ".join(sorted(named)) or "a spec it does not name"
    plan.refusals.append(f"{plan.manifest.path}: written by an earlier sqlgen for {who}, not "
                         f"for {shown}; build that spec once with this sqlgen first, or "
                         f"{_OUT_HINT}")


def _adopt_renamed(plan: Plan, inputs: list[str] | None) -> None:
    """A spec renamed (or moved) since its build: an entry whose spec file is gone and whose
    spec hash is this spec's is taken as this spec's (``git mv usd.yml revenue_usd.yml``).
    An entry of a spec that is gone and was edited too stays refused (see _owned_message)."""
    spec_line = next((line for line in inputs or [] if line.startswith("spec ")), None)
    if plan.owner is None or spec_line is None:
        return
    for other in sorted(o for o in plan.manifest.entries if o not in (None, plan.owner)):
        entry = plan.manifest.entries[other]
        if spec_line in entry.inputs and not os.path.exists(plan.folder / other):
            del plan.manifest.entries[other]
            plan.manifest.entries.setdefault(plan.owner, Entry()).files.update(entry.files)


def _header_specs(folder: Path, names) -> set[str]:
    """The spec file names the headers of these files give (``... from <spec> (spec``)."""
    found = set()
    for name in names:
        try:
            line = _first_line(folder / name).decode("utf-8", "replace")
        except OSError:
            continue
        match = re.search(r" from (.+?) \(spec ", line)
        if match:
            found.add(match.group(1))
    return found


def _owned_message(plan: Plan, other: str, paths: list[str], shown: str) -> str:
    spec = os.path.normpath(plan.folder / other)
    gone = ("" if os.path.exists(spec) else f" (no spec is at {spec} any more: if its files "
            "are not needed, delete them and build again)")
    return (f"{', '.join(paths)}: generated for spec {spec} (recorded as {other} in "
            f"{plan.manifest.path}), so not replaced by a build of {shown}; give each spec "
            f"its own output.prefix, or {_OUT_HINT}{gone}")


def _refusal(plan: Plan, path: Path) -> str | None:
    """Why ``path`` may not be written by this build: a message, or the name of the spec
    that owns it; None when it may."""
    other = plan.manifest.owner_of(path.name)
    # (None: a manifest of an earlier sqlgen, not taken as this spec's, refused as a whole above)
    if other not in (False, None, plan.owner) and (path.exists() or path.is_symlink()):
        return other
    if path.is_symlink():
        return f"{path}: is a symbolic link, so not replaced; remove it or {_OUT_HINT}"
    if path.exists() and not path.is_file():
        return f"{path}: is not a file, so not replaced; move it away or {_OUT_HINT}"
    if path.exists() and not _is_generated(path):
        return _not_ours(path)
    return None


def _not_ours(path: Path) -> str:
    return (f"{path}: not generated by sqlgen, so not overwritten; move it away or "
            f"{_OUT_HINT}")


def _not_a_folder(folder: Path) -> Path | None:
    """The path that keeps ``folder`` from being a folder: itself or an ancestor that is a
    file. None when the folder exists or can be created."""
    for path in (folder, *folder.parents):
        if path.exists():
            return None if path.is_dir() else path
    return None


def _leftovers(folder: Path) -> list[Path]:
    """Temporary files of builds that no longer run: ``.sqlgen-tmp-<pid>-*`` whose process
    is gone, and those of the sqlgen before (which named no process)."""
    found = [p for p in folder.glob(f"{TEMP_PREFIX}*")
             if _TEMP.fullmatch(p.name) and not _running(p.name)]
    found += [p for p in folder.glob(".*.tmp") if _LEGACY_TEMP.fullmatch(p.name)]
    return sorted(p for p in found if p.is_file() and not p.is_symlink())


def _running(name: str) -> bool:
    """Whether the process named in a temporary file's name still runs (it may be writing)."""
    pid = _TEMP.fullmatch(name).group(1)
    if int(pid) == os.getpid():
        return False
    try:
        os.kill(int(pid), 0)
    except ProcessLookupError:
        return False
    except OSError:  # another user's process
        return True
    return True


def _os_message(err: OSError, folder: Path, action: str) -> str:
    if isinstance(err, _Refused):
        return _not_ours(Path(err.args[0]))
    where = err.filename or folder
    return (f"{where}: cannot {action} ({err.strerror or err}); check its permissions or "
            f"{_OUT_HINT}")


def refuse(plans: list[Plan]) -> None:
    """Raise one OutputError naming every refusal of every plan, each once."""
    problems = [line for plan in plans for line in plan.refusals]
    if problems:
        raise OutputError("\n".join(dict.fromkeys(problems)))


# ------------------------------------------------------------------------------ writing


@dataclass(frozen=True)
class WriteResult:
    written: list[str]
    unchanged: list[str]
    removed: list[str]
    leftovers: int = 0
    notes: tuple[str, ...] = ()


def write_folders(jobs: list[tuple]) -> list[WriteResult]:
    """Write several folders. Each job is (folder, files, build inputs or None, spec name
    as ``spec_owner`` gives it or None, optionally how messages show the spec). Without
    inputs or spec name no manifest entry is written, but other specs' entries still
    protect their files.

    Every folder is checked before the first file of any of them is written.
    """
    with locked([folder for folder, *_ in jobs]):
        plans = [plan_folder(folder, owner, inputs, list(files), *shown)
                 for folder, files, inputs, owner, *shown in jobs]
        refuse(plans)
        return [_write(plan, files, inputs) for plan, (_, files, inputs, *_) in zip(plans, jobs)]


@contextlib.contextmanager
def locked(folders: list[Path]):
    """Hold an exclusive lock on each existing folder (POSIX ``flock`` on the folder itself,
    no lock file), so that two builds into one folder read and write its manifest one after
    the other. Where locking is not available, nothing is locked."""
    with contextlib.ExitStack() as stack:
        for folder in sorted({f.resolve() for f in folders}):
            try:
                fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
            except OSError:
                continue  # not there yet, or not a folder: the plan says what is wrong
            stack.callback(os.close, fd)
            if fcntl is not None:
                fcntl.flock(fd, fcntl.LOCK_EX)
        yield


def write_files(folder: Path, files: dict[str, str], inputs: list[str] | None = None,
                owner: str | None = None) -> WriteResult:
    """Write every file atomically; remove this spec's files it no longer generates.

    With ``inputs`` (``compiler.build_inputs``) and ``owner`` the spec's manifest entry is
    written last; without, the manifest is left as it is.
    """
    return write_folders([(folder, files, inputs, owner)])[0]


def tidy(plan: Plan) -> int:
    """Remove a folder's leftover temporary files; how many."""
    for path in plan.leftovers:
        try:
            path.unlink()
        except FileNotFoundError:
            pass  # another build removed it first
        except OSError as err:
            raise OutputError(_os_message(err, plan.folder, "remove a temporary file")) from None
    return len(plan.leftovers)


def _write(plan: Plan, files: dict[str, str], inputs: list[str] | None) -> WriteResult:
    folder = plan.folder
    try:
        folder.mkdir(parents=True, exist_ok=True)
        leftovers = tidy(plan)
        written, unchanged = [], []
        for name, text in files.items():
            (written if _write_if_changed(folder / name, text) else unchanged).append(name)
        for path in plan.remove:
            path.unlink()
        if inputs is not None and plan.owner is not None:
            plan.manifest.take(plan.owner, _entry(inputs, files))
            _write_if_changed(plan.manifest.path, plan.manifest.text())
    except OSError as err:
        raise OutputError(_os_message(err, folder, "write")) from None
    return WriteResult(written, unchanged, [p.name for p in plan.remove], leftovers,
                       tuple(plan.notes()))


def _write_if_changed(path: Path, text: str) -> bool:
    """Replace the file atomically unless it already holds ``text``; whether it was written."""
    data = text.encode("utf-8")
    try:
        if path.read_bytes() == data:
            return False
    except FileNotFoundError:
        pass
    _atomic_write(path, data)
    return True


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _atomic_write(path: Path, data: bytes) -> None:
    """Write through a temporary file and a rename. The file gets the mode a plain write
    would give it: a replaced file keeps its own, a new one 0o666 less the umask."""
    try:
        mode = stat.S_IMODE(path.stat().st_mode)
    except FileNotFoundError:
        mode = 0o666 & ~_umask()
    import tempfile  # here: only a write needs it, and --check imports no more than it must

    try:
        fd, tmp = tempfile.mkstemp(prefix=f"{TEMP_PREFIX}{os.getpid()}-", dir=path.parent)
    except OSError as err:  # name the file being written, not the temporary one
        raise OSError(err.errno, err.strerror, str(path)) from None
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            os.fchmod(handle.fileno(), mode)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


# ------------------------------------------------------------------------------ checking


@dataclass(frozen=True)
class Stale:
    """A file of this spec that differs from what a build writes: ``state`` is changed,
    missing or removed (generated before, no longer part of the output); ``diff`` the
    unified diff (or the one line said about a removed file)."""

    path: Path
    state: str
    diff: str


def stale_files(plan: Plan, files: dict[str, str]) -> list[Stale]:
    """Every file of this spec that differs from ``files`` on disk, and this spec's files
    it no longer generates."""
    found = []
    for name, text in files.items():
        path = plan.folder / name
        try:
            old = path.read_bytes().decode("utf-8", "replace")
        except FileNotFoundError:
            old = None
        except OSError as err:
            raise OutputError(_os_message(err, plan.folder, "read")) from None
        if old == text:
            continue
        label = f"{path}" + ("" if old is not None else " (missing)")
        diff = difflib.unified_diff((old or "").splitlines(keepends=True),
                                    text.splitlines(keepends=True),
                                    fromfile=f"{label} (on disk)", tofile=f"{path} (from spec)")
        found.append(Stale(path, "changed" if old is not None else "missing", "".join(diff)))
    for path in plan.remove:
        found.append(Stale(path, "removed", f"{path}: generated by sqlgen but no longer part "
                                            "of the spec's output\n"))
    return found


def check_files(plan: Plan, files: dict[str, str]) -> list[str]:
    """Unified diffs (and notes) for every file of this spec that differs from ``files``
    on disk, and for this spec's files it no longer generates."""
    return [stale.diff for stale in stale_files(plan, files)]
