"""The output folder OUT: one whole generation of results at a time, a lock, and cleanup.

A reduction never writes its results over the previous ones. It writes a complete new set into
a new generation folder inside OUT and then switches OUT to it with one atomic rename of the
``current`` link, so that whatever stops the writer (a kill at any moment, a full disk), every
file users see comes from one reduction: the old one or the new one. The paths users and the
docs know keep working through fixed links into ``current``::

    OUT/.tunnelred                  marks a folder tunnelred made, and its kind: results or plan
    OUT/.lock                       held by the one process reducing into OUT (its pid inside)
    OUT/.cache/                     per-run cache entries (shared by the generations)
    OUT/.generations/<id>/          a complete set: results.nc, ..., figures/, report.pdf
    OUT/current -> .generations/<id>
    OUT/results.nc -> current/results.nc    (and so on for each entry of the generation)

A plan (``tunnelred plan``) is written the same way, into a folder of its own kind: a reduction
never opens a plan's folder and a plan never opens a results folder, since either would replace
the other's generation.

Leftovers of an interrupted run (a half-written generation, temporary files, a stale switch
link) are removed the next time OUT is opened. docs/results.md describes the layout.

POSIX only for the links and the lock (``fcntl.flock``: the kernel releases the lock of a
process that dies, so a stale lock is never mistaken for a live one).
"""

from __future__ import annotations

import contextlib
import json
import os
import secrets
import shutil
import stat
import time
from collections.abc import Iterator
from pathlib import Path

from tunnelred import __version__
from tunnelred.common.errors import OutputFolderError, OutsideError
from tunnelred.products.store import contained, fsync_dir

try:
    import fcntl
except ImportError:  # pragma: no cover - not POSIX
    fcntl = None

__all__ = [
    "MARKER",
    "OUTPUT_NAMES",
    "ResultsFolder",
    "Staging",
    "check_location",
    "folder_kind",
    "generation_of",
    "is_results_folder",
    "link_outputs",
    "open_results_folder",
]

#: The file that marks a folder as a tunnelred output folder; its JSON names the folder's kind.
MARKER = ".tunnelred"
#: The kinds of output folder: a reduction's (or a watch's) results, or a plan.
KINDS = ("results", "plan")
_LOCK = ".lock"
_CACHE = ".cache"
_GENERATIONS = ".generations"
_CURRENT = "current"
_SWITCH_PREFIX = ".current-"
# What an older tunnelred left at the top of OUT (no generations yet).
_OLD_LAYOUT = ("results.nc", "provenance.json")
# Outputs a reduction makes: at the top of OUT they are links into `current`; a plain file or
# folder of these names (left by the layout before generations) is removed once a generation is
# in force, so that no report.pdf of older results survives beside newer ones.
OUTPUT_NAMES = (
    "results.nc",
    "results.csv",
    "budgets.csv",
    "failures.csv",
    "provenance.json",
    "figures",
    "report.pdf",
)


def _in_use(pid: str) -> OutputFolderError:
    who = f"process {pid}" if pid else "another process"
    return OutputFolderError(
        f"the output folder is in use by {who} (a tunnelred reduce or watch); "
        "wait for it to finish or choose another folder"
    )


def is_results_folder(root: Path) -> bool:
    """True for a folder tunnelred made (marker, a watch's state, or an older layout's files)."""
    if (root / MARKER).is_file() or (root / _CACHE).is_dir() or (root / ".live").is_dir():
        return True
    return all((root / name).is_file() for name in _OLD_LAYOUT)


def _recorded_kind(root: Path) -> str | None:
    """The kind the marker names; None for a marker of before kinds, or one not to be trusted
    (not a regular file, too large, not a JSON object)."""
    marker = root / MARKER
    try:
        if not stat.S_ISREG(os.lstat(marker).st_mode) or marker.stat().st_size > 4096:
            return None
        record = json.loads(marker.read_text(encoding="utf-8"))
    except (OSError, ValueError, UnicodeDecodeError):
        return None
    kind = record.get("kind") if isinstance(record, dict) else None
    return kind if kind in KINDS else None


def folder_kind(root) -> str | None:
    """``"results"`` or ``"plan"`` for a folder tunnelred made, None for any other folder."""
    root = Path(root)
    kind = _recorded_kind(root)
    if kind is not None:
        return kind
    # Before kinds, a plan's folder carried the bare marker too; plan.json at its top (a
    # results folder keeps its plan in plan/) tells it apart.
    if (root / "plan.json").is_file():
        return "plan"
    return "results" if is_results_folder(root) else None


def _other_kind(out: Path, found: str) -> OutputFolderError:
    if found == "plan":
        return OutputFolderError(
            f"{out} holds a plan written by 'tunnelred plan', not results, and results written "
            "there would replace it; choose another output folder (a plan made with "
            "'tunnelred plan ... -o OUT' after the reduction goes into OUT/plan/ beside them)"
        )
    return OutputFolderError(
        f"{out} holds tunnelred results, which a plan would replace; write the plan into its "
        "plan/ subfolder ('tunnelred plan ... -o OUT' does) or into another folder"
    )


def check_location(
    out, campaign=None, *, force: bool = False, kind: str | None = "results"
) -> Path:
    """Check that ``out`` can serve as an output folder, before anything is reduced.

    Returns the resolved path. Raises :class:`OutputFolderError` when it is (or would be)
    inside the campaign folder, a file, under a file, not writable, a folder tunnelred made
    of another ``kind`` than the one to write (whatever ``force``; None: not judged), or a
    non-empty folder that tunnelred did not make (unless ``force``).
    """
    out = Path(os.path.realpath(Path(out).expanduser()))
    if campaign is not None:
        root = Path(os.path.realpath(campaign))
        if out == root or out.is_relative_to(root):
            raise OutputFolderError(
                f"{out} is inside the campaign folder {root}, which tunnelred never writes; "
                "choose an output folder outside it"
            )
    existing = out
    while not existing.exists():
        if existing.is_symlink():
            raise OutputFolderError(f"{existing} is a broken link; remove it or choose another")
        existing = existing.parent
    if not existing.is_dir():
        raise OutputFolderError(f"{existing} exists and is not a folder")
    if not os.access(existing, os.W_OK | os.X_OK):
        raise OutputFolderError(f"{existing} cannot be written (permission denied)")
    found = folder_kind(out) if existing == out else None
    if kind is not None and found is not None and found != kind:
        raise _other_kind(out, found)
    if existing == out and not force:
        entries = [e for e in out.iterdir()]
        if entries and found is None:
            raise OutputFolderError(
                f"{out} is not empty and is not a tunnelred results folder; choose another "
                "folder, or add --force to write into it"
            )
    return out


class _Lock:
    """An exclusive lock on OUT/.lock; the file holds the holder's pid for the message."""

    def __init__(self, root: Path):
        self.path = root / _LOCK
        self.fd: int | None = None

    def acquire(self) -> None:
        try:
            fd = os.open(self.path, os.O_RDWR | os.O_CREAT | os.O_NOFOLLOW, 0o666)
        except OSError as exc:
            raise OutputFolderError(f"{self.path} cannot be opened: {exc.strerror}") from None
        if fcntl is not None:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError:
                pid = os.read(fd, 32).decode("ascii", "replace").strip()
                os.close(fd)
                raise _in_use(pid) from None
        else:  # pragma: no cover - not POSIX: a pid file; a dead holder's lock is taken over
            pid = os.read(fd, 32).decode("ascii", "replace").strip()
            if pid.isdigit() and int(pid) != os.getpid() and _alive(int(pid)):
                os.close(fd)
                raise _in_use(pid)
        os.ftruncate(fd, 0)
        os.pwrite(fd, f"{os.getpid()}\n".encode("ascii"), 0)
        self.fd = fd

    def release(self) -> None:
        if self.fd is not None:
            with contextlib.suppress(OSError):
                os.ftruncate(self.fd, 0)
            os.close(self.fd)  # closing releases the flock
            self.fd = None


def _alive(pid: int) -> bool:  # pragma: no cover - not POSIX
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:
        return True
    return True


def _remove(path: Path) -> None:
    with contextlib.suppress(FileNotFoundError):
        if path.is_symlink() or not path.is_dir():
            path.unlink()
        else:
            shutil.rmtree(path, ignore_errors=True)


class Staging:
    """A generation being written: files go into :attr:`path`; :meth:`carry` reuses old ones."""

    def __init__(self, folder: ResultsFolder, path: Path, previous: Path | None):
        self.folder = folder
        self.path = path
        self.previous = previous

    def file(self, name: str) -> Path:
        """Where to write ``name`` (a path relative to the generation), checked to stay inside."""
        return contained(self.path, self.path / name)

    def previous_record(self, name: str) -> dict:
        """A small JSON object the previous generation holds under ``name``; {} if none or bad.

        OUT is not trusted input: anything that is not a regular file of a sane size holding a
        JSON object reads as empty.
        """
        if self.previous is None:
            return {}
        try:
            path = self.previous / name
            if not stat.S_ISREG(os.lstat(path).st_mode) or path.stat().st_size > 1 << 20:
                return {}
            record = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError, UnicodeDecodeError):
            return {}
        return record if isinstance(record, dict) else {}

    def carry(self, name: str) -> bool:
        """Bring ``name`` unchanged from the previous generation (hard link, else a copy).

        Returns False when the previous generation has no such file.
        """
        if self.previous is None:
            return False
        try:
            # ``name`` may come from a record in OUT: it must name a file of the generation.
            source = contained(self.previous, self.previous / name)
            if not stat.S_ISREG(os.lstat(source).st_mode):
                return False
        except (OSError, OutsideError):
            return False
        target = self.file(name)
        target.parent.mkdir(parents=True, exist_ok=True)
        try:
            os.link(source, target)
        except OSError:
            shutil.copy2(source, target)
        return True


class ResultsFolder:
    """An output folder held for one reduction (or one watch): locked, cleaned, generation-wise.

    Use :func:`open_results_folder`; release with :meth:`close` or as a context manager.
    """

    def __init__(self, root: Path, kind: str = "results"):
        self.root = root
        self.kind = kind
        self._lock = _Lock(root)

    # -- opening and closing

    def _open(self) -> None:
        self._lock.acquire()
        try:
            # Judged again under the lock: another kind may have been written meanwhile.
            found = folder_kind(self.root)
            if found is not None and found != self.kind:
                raise _other_kind(self.root, found)
            marker = self.root / MARKER
            if not marker.is_file() or _recorded_kind(self.root) is None:
                record = {"tunnelred": __version__, "layout": "generations", "kind": self.kind}
                tmp = self.root / f".marker-{secrets.token_hex(4)}.tmp"
                tmp.write_text(json.dumps(record) + "\n", encoding="utf-8")
                os.replace(tmp, marker)
            self.cache.mkdir(exist_ok=True)
            (self.root / _GENERATIONS).mkdir(exist_ok=True)
            self.clean()
        except OutputFolderError:
            self._lock.release()
            raise
        except OSError as exc:
            self._lock.release()
            raise OutputFolderError(f"{self.root} cannot be written: {exc.strerror}") from None

    def close(self) -> None:
        self._lock.release()

    def __enter__(self) -> ResultsFolder:
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    # -- where things go

    @property
    def cache(self) -> Path:
        return self.root / _CACHE

    def inside(self, path) -> Path:
        """``path`` resolved and checked to lie inside OUT (see :func:`store.contained`)."""
        return contained(self.root, path)

    def current(self) -> Path | None:
        """The generation in force, or None before the first one."""
        return _current(self.root)

    # -- cleanup

    def clean(self) -> None:
        """Remove what an interrupted run left: other generations, temporary files and links."""
        current = self.current()
        generations = self.root / _GENERATIONS
        for entry in generations.iterdir():
            if current is None or entry.name != current.name:
                _remove(entry)
        for entry in self.root.iterdir():
            if entry.name.startswith(_SWITCH_PREFIX) or (
                entry.name.startswith(".") and entry.name.endswith(".tmp")
            ):
                _remove(entry)
        for entry in self.cache.glob(".*.tmp"):
            _remove(entry)
        _link_entries(self.root, current)

    # -- generations

    @contextlib.contextmanager
    def stage(self) -> Iterator[Staging]:
        """A new generation to write; switched to if the block completes, else removed.

        A full disk or any other error while writing leaves the previous generation in force
        (an OSError becomes :class:`OutputFolderError`); KeyboardInterrupt is re-raised.
        """
        name = time.strftime("%Y%m%dT%H%M%S") + f"-{os.getpid()}-{secrets.token_hex(3)}"
        path = self.inside(self.root / _GENERATIONS / name)
        staging = Staging(self, path, self.current())
        try:
            path.mkdir()
            yield staging
            fsync_dir(path)
            self._switch(path)
        except OSError as exc:
            _remove(path)
            raise OutputFolderError(
                f"the results could not be written to {self.root} ({exc.strerror or exc}); "
                "the previous results are kept"
            ) from None
        except BaseException:
            _remove(path)
            raise
        self.clean()

    def _switch(self, generation: Path) -> None:
        # A new link under a temporary name, renamed over `current`: one atomic step.
        link = self.root / f"{_SWITCH_PREFIX}{secrets.token_hex(4)}"
        os.symlink(f"{_GENERATIONS}/{generation.name}", link)
        try:
            os.replace(link, self.root / _CURRENT)
        except BaseException:
            _remove(link)
            raise
        fsync_dir(self.root)


def _link_entries(root: Path, generation: Path | None) -> None:
    """OUT/<name> -> current/<name> for each entry of the generation; dangling ones removed."""
    names = set()
    if generation is not None:
        names = {e.name for e in generation.iterdir() if not e.name.startswith(".")}
    for entry in root.iterdir():
        if entry.name in names:
            continue
        if entry.is_symlink() and os.readlink(entry).startswith(f"{_CURRENT}/"):
            entry.unlink()
        elif generation is not None and entry.name in OUTPUT_NAMES:
            _remove(entry)
    for name in sorted(names):
        top = root / name
        target = f"{_CURRENT}/{name}"
        if top.is_symlink() and os.readlink(top) == target:
            continue
        link = root / f"{_SWITCH_PREFIX}{secrets.token_hex(4)}"
        os.symlink(target, link)
        if top.is_dir() and not top.is_symlink():
            shutil.rmtree(top)  # figures/ of the layout before generations
        os.replace(link, top)


def _current(root: Path) -> Path | None:
    link = root / _CURRENT
    if not link.is_symlink():
        return None
    target = os.readlink(link)
    generation = root / target
    if not target.startswith(f"{_GENERATIONS}/") or "/" in target[len(_GENERATIONS) + 1 :]:
        return None
    return generation if generation.is_dir() else None


def open_results_folder(
    out, campaign=None, *, force: bool = False, kind: str = "results"
) -> ResultsFolder:
    """Check, create, lock and clean an output folder of ``kind`` (see :func:`check_location`).

    Raises
    ------
    OutputFolderError
        The folder cannot be used, or another process holds it: nothing was changed.
    """
    if kind not in KINDS:
        raise ValueError(f"kind must be one of {KINDS}; got {kind!r}")
    root = check_location(out, campaign, force=force, kind=kind)
    try:
        root.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputFolderError(f"{root} cannot be made: {exc.strerror}") from None
    folder = ResultsFolder(root, kind)
    folder._open()
    return folder


def generation_of(out) -> Path:
    """The folder holding one whole set of results: OUT's current generation, or OUT itself.

    Readers that take more than one file (results.nc and budgets.csv, say) read them from here,
    so that a reduction switching generations meanwhile cannot mix two sets.
    """
    out = Path(out)
    return _current(out) or out


def link_outputs(out) -> None:
    """Make the top-level links of OUT's current generation (after a file was added to it)."""
    root = Path(out)
    _link_entries(root, _current(root))
