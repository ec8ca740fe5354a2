"""Files the tool writes: every output goes through here, and no output harms anything.

A run opens one :class:`RunOutputs` with its command, its input files, its ``--out`` folder and
its ``--report`` file, and writes every output through it (``run.write(path, data)``; the
``write_atomic`` function routes to the open run, so figure and page writers deep in the code
need not carry it). The rules, in one place:

* **Inputs are never written over.** A target is refused when it is an input of the run (paths
  resolved, so symlinks and ``..`` are followed, and compared by device and inode as well), or
  an existing file inside an input folder that no earlier run's manifest lists.
* **Only regular files.** A target that is a folder, device, FIFO or socket is refused. A target
  that is a symlink is written *through*: its resolved regular file is replaced, the link stays.
* **Atomic, with unique temporary names.** Data go to ``.NAME.PID.RANDOM.rateabs-tmp`` beside
  the target and are renamed into place; a failed write (full disk, Ctrl-C, any exception)
  removes its temporary file, and a run into a folder first removes the temporary files that
  killed runs left there.
* **Streamed files too.** ``run.stream(path)`` takes a file piece by piece as results arrive
  (a many-file run's combined table), with the same checks; it is listed and renamed into place
  only when complete.
* **A manifest per folder.** ``--out`` holds ``.rateabs-manifest.json`` (docs/formats.md) listing
  the run's command, inputs, times and files; each file is listed *before* it is renamed into
  place, so a killed run leaves nothing unlisted. A rerun first removes the files its
  predecessor's manifest lists (only those, only while unchanged, never an input), so a folder
  never mixes two runs.
* **One writer per folder.** While a run writes into ``--out`` it holds an advisory lock
  (``fcntl.flock`` on ``.rateabs.lock`` in the folder, released by the kernel when the process
  ends, however it ends). Another run waits for it, saying so in one line, and is refused after
  ``wait`` seconds. Where ``fcntl`` is missing (Windows) runs are not serialised.
* **Problems are one line.** A missing, read-only or non-folder target, or a full disk, raises
  :class:`~rateabs.errors.UsageError` naming the path and what to do.

What the run replaces or removes is told through ``notify`` (a callback taking one line); the
command line passes one with :func:`notices`, a library caller may pass its own or none.
"""

from __future__ import annotations

import contextvars
import errno
import hashlib
import json
import os
import secrets
import stat
import time
from collections.abc import Callable, Iterable, Iterator
from contextlib import contextmanager
from pathlib import Path

from .errors import UsageError

try:
    import fcntl
except ImportError:  # pragma: no cover - Windows: no advisory lock, runs are not serialised
    fcntl = None

MANIFEST = ".rateabs-manifest.json"
LOCK = ".rateabs.lock"
TMP_SUFFIX = ".rateabs-tmp"
MANIFEST_FORMAT = "rateabs-manifest/1"
#: How long a run waits for another run writing into the same folder (seconds).
LOCK_WAIT_S = 300.0

Notify = Callable[[str], None]

_ACTIVE: contextvars.ContextVar[tuple] = contextvars.ContextVar("rateabs_outputs", default=())
_NOTIFY: contextvars.ContextVar[Notify | None] = contextvars.ContextVar("rateabs_notify",
                                                                       default=None)

_COLLECTED: contextvars.ContextVar[list | None] = contextvars.ContextVar("rateabs_collected",
                                                                        default=None)

_FIXES = {
    errno.ENOSPC: "free some space or choose another folder",
    errno.EDQUOT: "free some space (disk quota) or choose another folder",
    errno.EACCES: "choose a folder you can write to",
    errno.EPERM: "choose a folder you can write to",
    errno.EROFS: "choose a folder on a writable file system",
    errno.ENOTDIR: "a part of the path is a file, not a folder; choose another path",
    errno.ENOENT: "create the folder first or choose another path",
    errno.ENAMETOOLONG: "choose a shorter path",
}


@contextmanager
def notices(notify: Notify | None) -> Iterator[None]:
    """Send the notices of every run opened inside the block to ``notify`` (one line each).

    The command line wraps each command in this, so that a run states on stderr which existing
    outputs it replaces or removes; a :class:`RunOutputs` given its own ``notify`` uses that.
    """
    token = _NOTIFY.set(notify)
    try:
        yield
    finally:
        _NOTIFY.reset(token)


def _fail(path: Path | str, exc: OSError, doing: str = "cannot write") -> UsageError:
    """An OSError as a one-line UsageError naming the path and what to do."""
    why = exc.strerror or type(exc).__name__
    return UsageError(f"{doing} here ({why.lower()})",
                      _FIXES.get(exc.errno, "check the path and try again"), file=str(path))


def _kind(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISFIFO(mode):
        return "a FIFO (named pipe)"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def _regular_or_absent(path: Path, real: Path) -> os.stat_result | None:
    """The stat of ``real`` when it is a regular file, None when it does not exist; else refuse."""
    try:
        st = os.stat(real)
    except FileNotFoundError:
        return None
    except OSError as exc:
        raise _fail(path, exc) from None
    if not stat.S_ISREG(st.st_mode):
        raise UsageError(f"is {_kind(st.st_mode)}; rateabs writes only regular files",
                         "give the path of a file to create or replace", file=str(path))
    return st


def _tmp_path(real: Path) -> Path:
    return real.with_name(f".{real.name[:100]}.{os.getpid()}.{secrets.token_hex(4)}{TMP_SUFFIX}")


class Sink:
    """Where a streamed output goes (:meth:`RunOutputs.stream`): ``write`` text or bytes as
    they come; it counts and hashes what it is given for the manifest."""

    def __init__(self, fh, path: Path) -> None:
        self._fh, self._path = fh, path
        self._sha = hashlib.sha256()
        self.size = 0

    def write(self, data: str | bytes) -> None:
        """Append ``data`` (str as UTF-8); a full disk is a one-line UsageError."""
        blob = _as_bytes(data)
        try:
            self._fh.write(blob)
        except OSError as exc:
            raise _fail(self._path, exc) from None
        self.size += len(blob)
        self._sha.update(blob)

    def sha256(self) -> str:
        """Hex digest of everything written so far."""
        return self._sha.hexdigest()


@contextmanager
def _temporary(path: Path, real: Path, old: os.stat_result | None) -> Iterator[Sink]:
    """A fresh temporary file beside ``real``, renamed into place when the block ends.

    The temporary file is removed whatever goes wrong (an OSError, Ctrl-C, anything else); an
    error of the block itself passes through unchanged.
    """
    while True:
        tmp = _tmp_path(real)
        try:
            fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0),
                         0o666)
            break
        except FileExistsError:
            continue
        except OSError as exc:
            raise _fail(path, exc) from None
    finishing = False
    try:
        with os.fdopen(fd, "wb") as fh:
            yield Sink(fh, path)
            finishing = True
        if old is not None:
            os.chmod(tmp, stat.S_IMODE(old.st_mode))
        os.replace(tmp, real)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        if finishing and isinstance(exc, OSError):
            raise _fail(path, exc) from None
        raise


def _replace_file(path: Path, real: Path, data: bytes, old: os.stat_result | None) -> None:
    """Write ``data`` to a fresh temporary name beside ``real`` and rename it into place."""
    with _temporary(path, real, old) as sink:
        sink.write(data)


def _as_bytes(data: str | bytes) -> bytes:
    return data if isinstance(data, bytes) else data.encode("utf-8")


def _digest(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _file_digest(path: Path) -> str | None:
    try:
        return _digest(path.read_bytes())
    except OSError:
        return None


def _now() -> str:
    return time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime())


class _Inputs:
    """The run's inputs, resolved: files never written over, folders whose files are kept."""

    def __init__(self, paths: Iterable[str | Path]) -> None:
        self.given = [str(p) for p in paths if p]
        self.files: dict[Path, str] = {}
        self.ids: dict[tuple[int, int], str] = {}
        self.folders: dict[Path, str] = {}
        for p in self.given:
            real = Path(os.path.realpath(p))
            try:
                st = os.stat(real)
            except OSError:
                self.files[real] = p
                continue
            if stat.S_ISDIR(st.st_mode):
                self.folders[real] = p
            else:
                self.files[real] = p
                self.ids[(st.st_dev, st.st_ino)] = p

    def clash(self, real: Path, st: os.stat_result | None) -> str | None:
        """The input a target would write over, or None."""
        if real in self.files:
            return self.files[real]
        if st is not None and (st.st_dev, st.st_ino) in self.ids:
            return self.ids[(st.st_dev, st.st_ino)]
        return None

    def folder_of(self, real: Path) -> str | None:
        """The input folder an existing target lies in, or None."""
        for folder, given in self.folders.items():
            if real.is_relative_to(folder):
                return given
        return None


class RunOutputs:
    """One run's outputs: the ``--out`` folder and ``--report`` file, written safely.

    Use as a context manager around everything the run writes::

        with RunOutputs("rates", ["plate.csv"], out="results", report="r.html") as run:
            run.write_in("rates.json", text)          # results/rates.json
            run.write("r.html", page)                 # the report

    On entry the targets are checked (nothing is written when one is refused), the folder is
    created and locked, its previous run's files are removed and a manifest is started; on exit
    the manifest is completed (status ``complete``, ``failed`` or ``interrupted``) and the lock
    released. ``planned`` names files this run will write into ``out``, checked on entry.
    """

    def __init__(self, command: str, inputs: Iterable[str | Path] = (), *,
                 out: str | Path | None = None, report: str | Path | None = None,
                 planned: Iterable[str] = (), notify: Notify | None = None,
                 wait: float = LOCK_WAIT_S) -> None:
        self.command = command
        self.inputs = _Inputs(inputs)
        self.out = Path(out) if out else None
        self.report = Path(report) if report else None
        self.planned = list(planned)
        self.wait = wait
        self._notify = notify
        self._real_out: Path | None = None
        self._lock_fd: int | None = None
        self._files: dict[str, dict] = {}
        self._replaced: list[str] = []
        self._started = ""
        self._token = None

    # ------------------------------------------------------------------ public

    def tell(self, line: str) -> None:
        """Pass one line to the notify callback (if any)."""
        fn = self._notify or _NOTIFY.get()
        if fn is not None:
            fn(line)

    @property
    def files(self) -> list[str]:
        """Names (relative to ``out``) of the files this run has written there so far."""
        return list(self._files)

    def __enter__(self) -> RunOutputs:
        self.open()
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        status = ("complete" if exc_type is None else
                  "interrupted" if issubclass(exc_type, KeyboardInterrupt) else "failed")
        self.close(status)

    def open(self) -> None:
        """Check the targets, take the folder (create, lock, clear the previous run's files)."""
        self._started = _now()
        if self.report is not None:
            self._check_report()
        if self.out is not None:
            self._take_folder()
            try:
                self._save_manifest("writing")
            except BaseException:
                self._unlock()
                raise
        self._token = _ACTIVE.set(_ACTIVE.get() + (self,))

    def close(self, status: str = "complete") -> None:
        """Complete the manifest, state replaced files, release the folder.

        After a failure the manifest is completed as far as the disk allows; the failure, not a
        second error about the manifest, is what the caller sees.
        """
        if self._token is not None:
            _ACTIVE.reset(self._token)
            self._token = None
        try:
            if self._replaced:
                more = f" and {len(self._replaced) - 3} more" if len(self._replaced) > 3 else ""
                self.tell(f"replaced {len(self._replaced)} existing file(s) that no earlier "
                          f"rateabs run had listed: {', '.join(self._replaced[:3])}{more}")
            if self._real_out is not None:
                self._save_manifest(status)
        except UsageError:
            if status == "complete":
                raise
        finally:
            self._unlock()

    def write_in(self, name: str, data: str | bytes) -> Path:
        """Write ``name`` (a relative path) inside the ``--out`` folder; returns its path."""
        if self.out is None:
            raise ValueError("this run has no --out folder")
        return self.write(self.out / name, data)

    def write(self, path: str | Path, data: str | bytes) -> Path:
        """Write one whole file atomically, after every check; returns the path as given."""
        return self.write_many([(path, data)])[0]

    def write_many(self, items) -> list[Path]:
        """Write several whole files (``(path, data)`` pairs), each atomically after every
        check, with one manifest update: all are listed before the first appears, so a run
        writing hundreds of pages does not rewrite the manifest per page."""
        staged = []
        for path, data in items:
            path = Path(path)
            real, rel, old = self._prepare(path)
            blob = _as_bytes(data)
            fresh = self._record(rel, len(blob), _digest(blob))
            staged.append((path, real, rel, blob, old, fresh))
        if any(rel is not None for _, _, rel, *_ in staged):
            self._save_manifest("writing")                  # listed before they appear
        for path, real, rel, blob, old, fresh in staged:
            self._note_replaced(path, rel, old, fresh)
            _replace_file(path, real, blob, old)
        return [path for path, *_ in staged]

    @contextmanager
    def stream(self, path: str | Path) -> Iterator[Sink]:
        """Write one file piece by piece, as results arrive, with the checks of :meth:`write`.

        ``with run.stream(out / "rates.csv") as sink: sink.write(line)``: the pieces go to a
        temporary file beside the target, which is listed in the manifest and renamed into
        place when the block ends; an error or Ctrl-C inside the block removes it, so the
        target never holds a part.
        """
        path = Path(path)
        real, rel, old = self._prepare(path)
        with _temporary(path, real, old) as sink:
            yield sink
            fresh = self._record(rel, sink.size, sink.sha256())
            if rel is not None:
                self._save_manifest("writing")
            self._note_replaced(path, rel, old, fresh)

    def _prepare(self, path: Path) -> tuple[Path, str | None, os.stat_result | None]:
        """Check a target before it is written; its resolved path, name in --out and stat."""
        real = Path(os.path.realpath(path))
        rel = self._relative(path)
        if rel in (MANIFEST, LOCK):
            raise UsageError("is rateabs's own record of the --out folder", "choose another "
                             "name", file=str(path))
        if rel is not None:
            self._make_parents(real.parent)
        elif not real.parent.is_dir():
            raise UsageError("the folder to write this file into does not exist",
                             "create it first or choose another path", file=str(path))
        return real, rel, self._check_target(path, real, rel)

    def _record(self, rel: str | None, size: int, sha256: str) -> bool:
        """List a file of --out in the manifest's table (saved by the caller); True when this
        run had not written it before."""
        fresh = rel is None or rel not in self._files
        if rel is not None:
            self._files[rel] = {"name": rel, "bytes": size, "sha256": sha256}
        return fresh

    def _note_replaced(self, path: Path, rel: str | None, old, fresh: bool) -> None:
        """Say (outside --out) or remember (inside) that a file of an earlier run is replaced."""
        if old is not None and fresh:
            if rel is None:
                self.tell(f"replacing {path}")
            else:
                self._replaced.append(rel)

    # ------------------------------------------------------------------ checks

    def _check_target(self, path: Path, real: Path, rel: str | None) -> os.stat_result | None:
        old = _regular_or_absent(path, real)
        hit = self.inputs.clash(real, old)
        if hit is not None:
            raise UsageError(f"is the input file {hit} of this run; rateabs never writes over "
                             "its inputs", "choose another --out folder or --report name",
                             file=str(path))
        if old is not None and (rel is None or rel not in self._files):
            folder = self.inputs.folder_of(real)
            if folder is not None:
                raise UsageError(f"is an existing file inside the input folder {folder}; "
                                 "rateabs never writes over its inputs",
                                 "choose an --out folder that holds no input files",
                                 file=str(path))
        return old

    def _check_report(self) -> None:
        path = self.report
        real = Path(os.path.realpath(path))
        out = Path(os.path.realpath(self.out)) if self.out is not None else None
        if out is not None and real.parent.is_relative_to(out):
            if real.relative_to(out).as_posix() in self.planned:
                raise UsageError("--report names one of the run's own outputs in --out",
                                 "give the report another name", file=str(path))
            return                     # inside --out: checked when written, folders made then
        if not real.parent.is_dir():
            what = "is a file, not a folder" if real.parent.exists() else "does not exist"
            raise UsageError(f"the folder of --report ({real.parent}) {what}",
                             "create the folder first or choose another --report path",
                             file=str(path))
        if not os.access(real.parent, os.W_OK):
            raise UsageError(f"the folder of --report ({real.parent}) is not writable",
                             "choose a folder you can write to", file=str(path))
        self._check_target(path, real, None)

    def _relative(self, path: Path) -> str | None:
        """``path`` relative to the --out folder (posix), or None when outside it."""
        if self._real_out is None:
            return None
        parent = Path(os.path.realpath(path.parent))
        if not parent.is_relative_to(self._real_out):
            return None
        return (parent / path.name).relative_to(self._real_out).as_posix()

    def _make_parents(self, folder: Path) -> None:
        try:
            folder.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise _fail(folder, exc, "cannot create this folder") from None

    # ------------------------------------------------------------------ the folder

    def _take_folder(self) -> None:
        out = self.out
        real = Path(os.path.realpath(out))
        if real.exists() and not real.is_dir():
            raise UsageError("is a file, not a folder", "give --out a folder (new or existing)",
                             file=str(out))
        if real in self.inputs.files:
            raise UsageError("is an input of this run", "choose another --out folder",
                             file=str(out))
        try:
            real.mkdir(parents=True, exist_ok=True)
        except FileExistsError:
            raise UsageError("a part of this path is a file, not a folder",
                             "choose another --out folder", file=str(out)) from None
        except OSError as exc:
            raise _fail(out, exc, "cannot create the --out folder") from None
        if not os.access(real, os.W_OK | os.X_OK):
            raise UsageError("the --out folder is not writable", "choose a folder you can "
                             "write to", file=str(out))
        self._real_out = real
        for name in self.planned:                     # refused before anything changes
            target = Path(os.path.realpath(real / name))
            hit = self.inputs.clash(target, _regular_or_absent(real / name, target))
            if hit is not None:
                raise UsageError(f"--out would replace the input file {hit} with {name}",
                                 "choose another --out folder", file=str(out))
        self._lock()
        try:
            self._clear_previous()
        except BaseException:
            self._unlock()
            raise

    def _lock(self) -> None:
        try:
            fd = os.open(self._real_out / LOCK, os.O_RDWR | os.O_CREAT, 0o666)
        except OSError as exc:
            raise _fail(self.out, exc, "cannot write into the --out folder") from None
        if fcntl is None:
            os.close(fd)
            return
        deadline = time.monotonic() + self.wait
        told = False
        while True:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                break
            except BlockingIOError:
                holder = _holder(fd)
                if time.monotonic() >= deadline:
                    os.close(fd)
                    raise UsageError(f"another rateabs run ({holder}) is writing into this "
                                     "folder", "wait for it to finish or choose another --out "
                                     "folder", file=str(self.out)) from None
                if not told:
                    self.tell(f"{self.out}: another rateabs run ({holder}) is writing here; "
                              f"waiting for it (at most {self.wait:g} s)")
                    told = True
                time.sleep(0.1)
            except OSError:          # no lock on this file system (some network mounts)
                break
        os.ftruncate(fd, 0)
        os.write(fd, f"pid {os.getpid()}, {self.command}".encode())
        self._lock_fd = fd

    def _unlock(self) -> None:
        if self._lock_fd is not None:
            os.close(self._lock_fd)           # closing releases the flock
            self._lock_fd = None

    def _clear_previous(self) -> None:
        """Remove the previous run's files (as its manifest lists them) and stale temporaries."""
        out = self._real_out
        old = read_manifest(out)
        folders = {out}
        removed, kept = 0, []
        for entry in (old or {}).get("files", []):
            name = str(entry.get("name", "")) if isinstance(entry, dict) else ""
            p = out / name
            if not name or Path(name).is_absolute() or ".." in Path(name).parts or \
                    not Path(os.path.realpath(p.parent)).is_relative_to(out):
                continue
            folders.add(p.parent)
            why = self._why_keep(p, entry)
            if why == "gone":
                continue
            if why:
                kept.append(f"{name} ({why})")
                continue
            try:
                p.unlink()
                removed += 1
            except OSError as exc:
                kept.append(f"{name} ({exc.strerror})")
        for folder in folders:
            _remove_stale_tmp(folder)
        for folder in sorted(folders - {out}, key=lambda f: -len(f.parts)):
            _rmdir_empty(folder, out)
        if removed:
            self.tell(f"{self.out}: removed the {removed} file(s) of the previous "
                      f"{old.get('command', '?')} run ({old.get('started', '?')})")
        if kept:
            self.tell(f"{self.out}: kept {len(kept)} file(s) of the previous run: "
                      + ", ".join(kept[:3]) + (" ..." if len(kept) > 3 else ""))

    def _why_keep(self, p: Path, entry: dict) -> str:
        """Why a listed file is not removed ('' when it may be), 'gone' when it is missing."""
        try:
            st = os.lstat(p)
        except FileNotFoundError:
            return "gone"
        except OSError as exc:
            return exc.strerror or "unreadable"
        if not stat.S_ISREG(st.st_mode):
            return "no longer a regular file"
        real = Path(os.path.realpath(p))
        if self.inputs.clash(real, st) is not None:
            return "an input of this run"
        if entry.get("sha256") and _file_digest(p) != entry["sha256"]:
            return "changed since that run wrote it"
        return ""

    def _save_manifest(self, status: str) -> None:
        doc = {"format": MANIFEST_FORMAT, "rateabs_version": _version(),
               "command": self.command, "inputs": [str(Path(p).resolve())
                                                   for p in self.inputs.given],
               "pid": os.getpid(), "started": self._started,
               "finished": None if status == "writing" else _now(), "status": status,
               "files": sorted(self._files.values(), key=lambda e: e["name"])}
        real = self._real_out / MANIFEST
        _replace_file(real, real, (json.dumps(doc, indent=2, ensure_ascii=False) + "\n")
                      .encode("utf-8"), None)


def _holder(fd: int) -> str:
    try:
        os.lseek(fd, 0, os.SEEK_SET)
        return os.read(fd, 200).decode("utf-8", "replace").strip() or "pid unknown"
    except OSError:
        return "pid unknown"


def _remove_stale_tmp(folder: Path) -> None:
    """Temporary files that killed runs left (ours by their suffix, their process gone)."""
    try:
        stale = [p for p in folder.iterdir() if p.name.endswith(TMP_SUFFIX)]
    except OSError:
        return
    for p in stale:
        parts = p.name[:-len(TMP_SUFFIX)].rsplit(".", 2)
        if len(parts) == 3 and parts[1].isdigit() and _alive(int(parts[1])):
            continue
        try:
            p.unlink()
        except OSError:
            pass


def _alive(pid: int) -> bool:
    """Whether a process with this id exists (the writer of a temporary file)."""
    if pid == os.getpid() or os.name == "nt":     # os.kill(pid, 0) would end it on Windows
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OverflowError, OSError):
        return True
    return True


def _rmdir_empty(folder: Path, top: Path) -> None:
    while folder != top and folder.is_relative_to(top):
        try:
            folder.rmdir()
        except OSError:
            return
        folder = folder.parent


def _version() -> str:
    from . import __version__

    return __version__


def read_manifest(folder: str | Path) -> dict | None:
    """The manifest of the last run into ``folder`` (None when there is none or it is unreadable)."""
    try:
        doc = json.loads((Path(folder) / MANIFEST).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    return doc if isinstance(doc, dict) and doc.get("format") == MANIFEST_FORMAT else None


@contextmanager
def collected_writes() -> Iterator[list[tuple[Path, bytes]]]:
    """``with collected_writes() as files``: inside, :func:`write_atomic` writes nothing and
    keeps each ``(path, bytes)`` in ``files`` instead. A helper process (one that draws a
    command's pictures) hands its files to the command this way, and the command writes them
    through its own run, so that they are guarded and listed like every other output."""
    files: list[tuple[Path, bytes]] = []
    token = _COLLECTED.set(files)
    try:
        yield files
    finally:
        _COLLECTED.reset(token)


def write_atomic(path: str | Path, data: str | bytes) -> Path:
    """Write a whole file safely: through the open :class:`RunOutputs` when there is one.

    Inside a run the file is checked against the run's inputs and listed in its manifest (the
    innermost open run whose folder holds the path takes it); outside any run it is still
    written only as a regular file, via a unique temporary name and a rename.
    """
    path = Path(path)
    sink = _COLLECTED.get()
    if sink is not None:
        sink.append((path, _as_bytes(data)))
        return path
    active = _ACTIVE.get()
    if active:
        real_parent = Path(os.path.realpath(path.parent))
        owner = next((r for r in reversed(active) if r._real_out is not None
                      and real_parent.is_relative_to(r._real_out)), active[-1])
        return owner.write(path, data)
    real = Path(os.path.realpath(path))
    try:
        real.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise _fail(path.parent, exc, "cannot create this folder") from None
    _replace_file(path, real, _as_bytes(data), _regular_or_absent(path, real))
    return path
