"""The output folder: what may be written there, the lock, the staging folder, the swap.

Rules (contract, "Command line"): ``--out`` is written only when it does not exist, is
empty, or holds an earlier egressmargin output; anything else is an input error and
nothing is touched. An earlier output is recognised by its manifest,
:data:`MANIFEST_NAME`, which names the tool, its version, every file and folder the run
wrote, the run's UTC date-time and the command. A run:

1. checks the target before any computing (:func:`inspect_target`, no writes);
2. claims it (:func:`claim`): creates missing parent folders, takes an exclusive lock on a
   hidden lock file beside it (a second run to the same folder stops with exit 2), removes
   staging folders left by runs that were killed (their process id is in the name), and
   creates its own staging folder beside the target;
3. assembles everything in the staging folder, then puts it in place
   (:meth:`OutputFolder.commit`): the old output is renamed aside, the staging folder
   renamed into place, and only then the old output deleted. With ``force`` and an
   earlier output that also holds files the tool did not write, only the tool's own files
   are replaced; the others stay where they are, untouched. A mount point (a container's
   volume) cannot be renamed: there the lock and staging folder go inside it and the
   output's entries are moved in (:func:`workspace`).

Nothing but an earlier output (its listed entries) is ever moved or deleted. Signals
(SIGINT, SIGTERM) are held off while folders are renamed, so an interruption never
leaves the target half-swapped.
"""

from __future__ import annotations

import errno
import json
import os
import re
import shlex
import shutil
import signal
import stat
import sys
import tempfile
import threading
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import Iterable

from .errors import InputError, Problem

try:  # POSIX; without it (Windows) runs are not locked against each other
    import fcntl
except ImportError:  # pragma: no cover
    fcntl = None

TOOL = "egressmargin"
#: The marker of an egressmargin output folder.
MANIFEST_NAME = "egressmargin-output.json"
#: Top-level names a run may write. With ``force``, a user's file of one of these names
#: would be overwritten, so it is refused before computing.
TOOL_NAMES = ("results.json", "report.html", "report.pdf", "plots", MANIFEST_NAME)
_TMP_TAG = "egressmargin-tmp"
_OLD_TAG = "egressmargin-old"
_LOCK_TAG = "egressmargin-lock"
#: OS errors that are the user's situation (disk full, no permission, read-only disk),
#: reported as input problems (exit 2) naming the path, not as a bug.
USER_ERRNOS = frozenset({errno.ENOSPC, errno.EDQUOT, errno.EACCES, errno.EPERM, errno.EROFS, errno.EFBIG,
                         errno.ENAMETOOLONG})
WHERE = "--out"


# --------------------------------------------------------------------------- time


def run_time(environ=None) -> datetime:
    """The run's date-time in UTC: ``SOURCE_DATE_EPOCH`` when set, else now.

    Parameters
    ----------
    environ : mapping, optional
        The environment (default ``os.environ``).

    Notes
    -----
    ``SOURCE_DATE_EPOCH`` is the number of seconds since 1970-01-01 00:00:00 UTC; a tool
    that embeds a date uses it instead of the clock, and an invalid value is an error
    (Reproducible Builds, "SOURCE_DATE_EPOCH specification", version 1.1).
    """
    environ = os.environ if environ is None else environ
    text = environ.get("SOURCE_DATE_EPOCH")
    if text is None or text == "":
        return datetime.now(timezone.utc).replace(microsecond=0)
    if not re.fullmatch(r"[0-9]+", text.strip()):
        raise InputError([Problem("SOURCE_DATE_EPOCH", f"found '{text}'; expected a whole number of seconds "
                                  "since 1970-01-01 00:00:00 UTC")])
    return datetime.fromtimestamp(int(text.strip()), timezone.utc)


def timestamp_text(when: datetime) -> str:
    """``YYYY-MM-DDTHH:MM:SSZ`` (ISO 8601, UTC)."""
    return when.astimezone(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


# --------------------------------------------------------------------------- inspecting


def listing(folder: Path) -> list[str]:
    """Every entry under ``folder`` as a relative POSIX path, folders ending in ``/``.

    Symbolic links are entries of their own (never followed).
    """
    folder = Path(folder)
    out = []
    for root, dirs, files in os.walk(folder, followlinks=False):
        rel = Path(root).relative_to(folder)
        for d in list(dirs):
            p = Path(root) / d
            if p.is_symlink():
                dirs.remove(d)
                out.append((rel / d).as_posix())
            else:
                out.append((rel / d).as_posix() + "/")
        out.extend((rel / f).as_posix() for f in files)
    return sorted(out)


def read_manifest(folder: Path) -> tuple[dict | None, str | None]:
    """The folder's manifest, or ``(None, why)`` when it is missing or not one of ours."""
    path = Path(folder) / MANIFEST_NAME
    if not path.is_file() or path.is_symlink():
        return None, f"no {MANIFEST_NAME}"
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, ValueError) as exc:
        return None, f"its {MANIFEST_NAME} cannot be read ({exc})"
    if not isinstance(data, dict) or data.get("tool") != TOOL:
        return None, f"its {MANIFEST_NAME} does not name {TOOL} as the tool"
    written = data.get("written")
    if not isinstance(written, list) or not all(isinstance(w, str) for w in written):
        return None, f"its {MANIFEST_NAME} has no list of written files"
    return data, None


def _safe_entry(entry: str) -> bool:
    p = Path(entry)
    return entry != "" and not p.is_absolute() and ".." not in p.parts


def _some(entries: list[str], n: int = 6) -> str:
    shown = ", ".join(f"'{e}'" for e in entries[:n])
    return shown + (f" and {len(entries) - n} more" if len(entries) > n else "")


@dataclass(frozen=True)
class Plan:
    """What is at the target and what a run will do there.

    Attributes
    ----------
    out : Path
        The target, absolute (not resolved: a link at the target is refused, not followed).
    kind : str
        ``"new"`` (nothing there), ``"empty"`` (an empty folder) or ``"earlier"`` (an
        earlier egressmargin output).
    keep : tuple of str
        Entries of an earlier output that the tool did not write, kept (only with force).
    tool_entries : tuple of str
        Entries listed in the earlier output's manifest (replaced).
    """

    out: Path
    kind: str
    keep: tuple[str, ...] = ()
    tool_entries: tuple[str, ...] = ()


def _refuse(message: str) -> InputError:
    return InputError([Problem(WHERE, message)])


#: What marks each kind of output in its manifest's ``written`` list.
OUTPUT_MARKS = {"run": "results.json", "comparison": "comparison.json"}


def _other_output(manifest: dict, purpose: str | None) -> str | None:
    """The kind of output the manifest describes when it is not ``purpose``'s kind, else None."""
    if purpose is None:
        return None
    for kind, mark in OUTPUT_MARKS.items():
        if kind != purpose and mark in manifest["written"] and OUTPUT_MARKS[purpose] not in manifest["written"]:
            return kind
    return None


def inspect_target(out: Path, inputs: Iterable[Path] = (), force: bool = False,
                   cwd: Path | None = None, purpose: str | None = None) -> Plan:
    """Check that a run may write ``out``; write nothing.

    Parameters
    ----------
    out : Path
        The output folder as the user gave it.
    inputs : iterable of Path
        Every file the run reads (study, criteria, uncertainty, histories): a folder
        holding one of them, at any depth, is never written.
    force : bool
        Accept an earlier output that also holds files the tool did not write (those
        are kept).
    cwd : Path, optional
        The current folder (default ``Path.cwd()``).
    purpose : str, optional
        ``"run"`` or ``"comparison"``: an earlier output of the other kind (its manifest
        lists the other's :data:`OUTPUT_MARKS` file) is refused, not replaced.

    Returns
    -------
    Plan

    Raises
    ------
    InputError
        With one problem saying what is at ``out`` and how to proceed.
    """
    given = Path(out)
    out = Path(os.path.abspath(given))
    here = (cwd or Path.cwd()).resolve()
    if given.name in ("", ".", ".."):
        if given.name == "..":
            above = "the current one" if str(given.parent) in ("", ".") else f"'{given.parent}'"
            what = f"the folder above {above} ('{out}'), named through '..'"
        else:
            what = "the root folder" if out == Path(out.anchor) else "the current folder"
        raise _refuse(f"'{given}' is {what}; egressmargin writes only a new folder, an empty one or an earlier "
                      "output of its own, named plainly. Give a new folder name, e.g. --out results; nothing was "
                      "changed")
    if out.is_symlink():
        raise _refuse(f"'{given}' is a symbolic link (to '{os.readlink(out)}'); egressmargin does not write through "
                      "links. Give the real folder or a new folder name; nothing was changed")
    real = out.resolve()
    if real == here or here.is_relative_to(real):
        raise _refuse(f"'{given}' is {'the current folder' if real == here else 'a folder that holds the current one'}"
                      "; egressmargin writes only a new folder, an empty one or an earlier output of its own. "
                      "Give a new folder name, e.g. --out results; nothing was changed")
    held = sorted({str(p) for p in (Path(i) for i in inputs if i is not None)
                   if Path(os.path.abspath(p)).resolve().is_relative_to(real)})
    if held:
        what = "is a study input" if any(Path(h).resolve() == real for h in held) else "holds a study input"
        raise _refuse(f"'{given}' {what} ({_some(held, 3)}); egressmargin never writes into a folder that holds "
                      f"the files it reads. Give a new folder, e.g. --out {given / 'results' if real.is_dir() else 'results'}"
                      "; nothing was changed")
    if out.exists() and not out.is_dir():
        raise _refuse(f"'{given}' is a file, not a folder; egressmargin writes a folder of results. Give a new folder "
                      f"name, e.g. --out {given.with_name(given.stem + '-out')}; nothing was changed")
    if not out.exists():
        _check_parent(given, out)
        return Plan(out, "new")
    top = sorted(p.name + ("/" if p.is_dir() and not p.is_symlink() else "") for p in out.iterdir()
                 if not _is_own(out, p.name))
    if not top:
        _check_parent(given, out)
        return Plan(out, "empty")
    manifest, why = read_manifest(out)
    if manifest is None:             # only the top level is listed: the folder may be large
        hint = (" (--force applies only to an earlier egressmargin output)" if force else "")
        raise _refuse(f"'{given}' holds {len(top)} item(s) ({_some(top)}) and is not an earlier egressmargin "
                      f"output ({why}); nothing was changed. Give a new or empty folder, or move those files away "
                      f"yourself{hint}")
    other = _other_output(manifest, purpose)
    if other is not None:
        raise _refuse(f"'{given}' holds the output of an earlier 'egressmargin {'compare' if other == 'comparison' else other}' "
                      f"({OUTPUT_MARKS[other]}), which 'egressmargin {'compare' if purpose == 'comparison' else purpose}' "
                      f"does not replace; nothing was changed. Give a new or empty folder, or an earlier "
                      f"{purpose} output, with --out")
    entries = [e for e in listing(out) if not _is_own(out, e.split("/")[0])]
    listed = {w for w in manifest["written"] if _safe_entry(w)}
    extra = [e for e in entries if e != MANIFEST_NAME and e not in listed]
    tool_entries = tuple(e for e in entries if e in listed)
    if extra and not force:
        raise _refuse(f"'{given}' is an earlier egressmargin output but also holds {len(extra)} item(s) egressmargin "
                      f"did not write: {_some(extra)}; nothing was changed. Move them away, or add --force to "
                      "replace only egressmargin's own files and keep these")
    clash = sorted(e for e in extra if e.rstrip("/") in TOOL_NAMES)
    if clash:
        raise _refuse(f"'{given}' holds {_some(clash)}, which egressmargin did not write (not in its {MANIFEST_NAME}) "
                      "but a new run writes under that name; move or rename it first; nothing was changed")
    _check_parent(given, out)
    if extra and not os.access(out, os.W_OK | os.X_OK):
        raise _refuse(f"cannot write in '{given}' (permission denied); nothing was changed")
    locked = [e for e in ("", *tool_entries) if e.endswith("/") or e == ""
              if (out / e).is_dir() and not os.access(out / e, os.W_OK | os.X_OK)]
    if locked:
        names = [f"'{given}'" if e == "" else f"'{e}'" for e in locked]
        raise _refuse(f"the earlier output in '{given}' cannot be removed: {', '.join(names[:3])} "
                      f"{'is' if len(names) == 1 else 'are'} read-only; make {'it' if len(names) == 1 else 'them'} "
                      "writable (chmod u+w) or give another --out; nothing was changed")
    return Plan(out, "earlier", tuple(extra), tool_entries)


def _check_parent(given: Path, out: Path) -> None:
    """The folder the run works in (see :func:`workspace`) is one this process can write in."""
    p = workspace(out)
    while not p.exists() and not p.is_symlink() and p != p.parent:
        p = p.parent
    if not p.is_dir():
        raise _refuse(f"'{p}' is a file, so the folder '{given}' cannot be made inside it; nothing was changed")
    if not os.access(p, os.W_OK | os.X_OK):
        raise _refuse(f"cannot write in '{p}' (permission denied), so '{given}' cannot be written there. Choose a "
                      "folder you can write to; nothing was changed")


# --------------------------------------------------------------------------- claiming


def user_os_error(exc: OSError, fallback: Path) -> InputError | None:
    """An :class:`InputError` naming the path for an OS error that is the user's situation, else None.

    Reading or writing the output folder or beside it: a full disk, a missing permission, a
    read-only disk. Any other OS error is a bug and keeps its traceback.
    """
    if exc.errno not in USER_ERRNOS:
        return None
    path = exc.filename or fallback
    full = exc.errno in (errno.ENOSPC, errno.EDQUOT, errno.EFBIG)
    return _refuse(f"'{path}': {exc.strerror or exc}. "
                   f"{'Free some space there' if full else 'Choose a folder you can write to'}, or give another "
                   "--out; no half-written output was left")


@contextmanager
def signals_held():
    """Hold off SIGINT and SIGTERM (delivered when the block ends) in the main thread."""
    if threading.current_thread() is not threading.main_thread() or not hasattr(signal, "pthread_sigmask"):
        yield
        return
    old = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT, signal.SIGTERM})
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return False          # a folder named with our own id, from a killed run before us
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True           # another user's live process
    return True


#: Longest file name in bytes on common file systems (NAME_MAX: 255 on ext4, XFS, btrfs,
#: APFS; 255 UTF-16 units on NTFS).
NAME_MAX = 255
#: Bytes the hidden names add to the output folder's name: "." + "." + the longest tag
#: (16-17) + "-" + a process id (up to 7 digits) + "-" + mkdtemp's 8 characters, rounded up.
_HIDDEN_EXTRA = 40


def _base_name(out: Path) -> str:
    """The output folder's name as the hidden names beside it use it: the name itself, or,
    when a hidden name would be longer than :data:`NAME_MAX`, its first bytes and ``~`` and
    12 hex digits of its SHA-256 (so a long but valid ``--out`` keeps working).

    >>> _base_name(Path("results"))
    'results'
    >>> len(_base_name(Path("r" * 240)).encode()) + _HIDDEN_EXTRA <= NAME_MAX
    True
    """
    import hashlib

    name = out.name
    raw = name.encode("utf-8", "surrogateescape")
    room = NAME_MAX - _HIDDEN_EXTRA
    if len(raw) <= room:
        return name
    digest = hashlib.sha256(raw).hexdigest()[:12]
    head = raw[:room - 13].decode("utf-8", "ignore")
    return f"{head}~{digest}"


def _hidden(out: Path, tag: str) -> str:
    return f".{_base_name(out)}.{tag}"


def _is_own(out: Path, name: str) -> bool:
    """Whether ``name`` is one of the hidden lock, staging or set-aside entries for ``out``."""
    return re.fullmatch(rf"{re.escape(_hidden(out, ''))}(?:{_LOCK_TAG}|(?:{_TMP_TAG}|{_OLD_TAG})-\d+-[A-Za-z0-9_]+)",
                        name) is not None


def _is_mount(path: Path) -> bool:
    return os.path.ismount(path)


def workspace(out: Path) -> Path:
    """Where the lock, staging and set-aside folders go: beside ``out``, or inside it when
    ``out`` is a mount point (a container's volume, say), which cannot be renamed and whose
    contents can be moved only within it."""
    out = Path(out)
    if out.is_dir() and not out.is_symlink() and _is_mount(out):
        return out
    return out.parent


def stale_folders(out: Path) -> list[Path]:
    """Staging and set-aside folders of ``out`` (in its :func:`workspace`) whose process is gone."""
    pattern = re.compile(rf"{re.escape(_hidden(out, ''))}(?:{_TMP_TAG}|{_OLD_TAG})-(\d+)-[A-Za-z0-9_]+")
    found = []
    try:
        beside = list(workspace(out).iterdir())
    except OSError:
        return []
    for p in beside:
        m = pattern.fullmatch(p.name)
        if m and p.is_dir() and not p.is_symlink() and not _alive(int(m.group(1))):
            found.append(p)
    return sorted(found)


def remove_tree(path: Path) -> str | None:
    """Remove a folder this tool staged or set aside; None when it is gone, else why not.

    A read-only folder inside it (a ``plots/`` a user made read-only, say) stops
    ``shutil.rmtree``; then every folder in the tree is given back its owner's
    permissions (u+rwx, links not followed) and the removal is tried once more, as
    ``chmod -R u+rwX`` then ``rm -rf`` would.
    """
    path = Path(path)
    for attempt in (0, 1):
        try:
            if attempt:
                _owner_may_remove(path)
            shutil.rmtree(path)
            return None
        except FileNotFoundError:
            return None
        except OSError as exc:
            why = f"{exc.strerror or exc}: '{exc.filename or path}'"
    return why


def _owner_may_remove(top: Path) -> None:
    """u+rwx on ``top`` and on every folder below it (each before it is listed)."""
    if top.is_symlink() or not top.is_dir():
        return
    os.chmod(top, stat.S_IMODE(os.lstat(top).st_mode) | 0o700)
    for root, dirs, _ in os.walk(top):
        for d in dirs:
            p = os.path.join(root, d)
            if not os.path.islink(p):
                os.chmod(p, stat.S_IMODE(os.lstat(p).st_mode) | 0o700)


class OutputFolder:
    """A claimed output folder: the lock is held and a staging folder exists beside it.

    Use as a context manager; leaving it (normally, on an error or on a signal) removes
    the staging folder and the lock file.
    """

    def __init__(self, plan: Plan, given: Path, inputs: tuple[Path, ...], force: bool, when: datetime,
                 purpose: str | None = None):
        self.plan, self.given, self.inputs, self.force, self.when = plan, given, inputs, force, when
        self.purpose = purpose
        self.out = plan.out
        self.home = workspace(self.out)
        self.lock_path = self.home / _hidden(self.out, _LOCK_TAG)
        self.staging: Path | None = None
        self._aside: Path | None = None
        self._lock_fd: int | None = None
        self._made: list[Path] = []
        self.committed = False
        #: Folders of this tool left beside the output because they could not be removed,
        #: with the reason (reported as warnings: the output itself is in place).
        self.leftovers: list[tuple[Path, str]] = []

    # the lock ----------------------------------------------------------------
    def _make_parents(self) -> None:
        missing = []
        p = self.out.parent
        while not p.exists():
            missing.append(p)
            p = p.parent
        for d in reversed(missing):
            d.mkdir()
            self._made.append(d)

    def _lock(self) -> None:
        if fcntl is None:  # pragma: no cover
            return
        while True:
            fd = os.open(self.lock_path, os.O_RDWR | os.O_CREAT, 0o644)
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError:
                holder = os.read(fd, 32).decode("ascii", "replace").strip()
                os.close(fd)
                raise _refuse(f"another egressmargin run{f' (process {holder})' if holder else ''} is writing "
                              f"'{self.given}'; wait for it to finish or choose another --out (lock file "
                              f"'{self.lock_path}')") from None
            try:
                same = os.fstat(fd).st_ino == os.stat(self.lock_path).st_ino
            except FileNotFoundError:
                same = False
            if same:       # not a file the previous holder unlinked as we opened it
                break
            os.close(fd)
        os.ftruncate(fd, 0)
        os.write(fd, str(os.getpid()).encode("ascii"))
        self._lock_fd = fd

    def _unlock(self) -> None:
        if self._lock_fd is None:
            return
        try:
            if os.fstat(self._lock_fd).st_ino == os.stat(self.lock_path).st_ino:
                os.unlink(self.lock_path)
        except FileNotFoundError:
            pass
        os.close(self._lock_fd)
        self._lock_fd = None

    def __enter__(self) -> "OutputFolder":
        try:
            with signals_held():     # a signal delivered when the block ends is still caught below
                self._make_parents()
                self._lock()
                # under the lock: what is there now (another run may just have finished)
                self.plan = inspect_target(self.given, self.inputs, self.force, purpose=self.purpose)
                for p in stale_folders(self.out):
                    why = remove_tree(p)
                    if why is not None:
                        self.leftovers.append((p, why))
                self.staging = Path(tempfile.mkdtemp(prefix=_hidden(self.out, f"{_TMP_TAG}-{os.getpid()}-"),
                                                     dir=self.home))
                _usual_permissions(self.staging)
        except OSError as exc:
            self._release()
            problem = user_os_error(exc, self.home)
            if problem is None:
                raise
            raise problem from None
        except BaseException:
            self._release()
            raise
        return self

    def __exit__(self, *exc) -> None:
        with signals_held():
            self._release()

    def _release(self) -> None:
        for p in (self.staging, self._aside):
            if p is not None and p.exists():
                shutil.rmtree(p, ignore_errors=True)
        self.staging = self._aside = None
        self._unlock()
        if not self.committed:
            for d in reversed(self._made):
                try:
                    d.rmdir()
                except OSError:
                    break

    # putting the output in place ---------------------------------------------
    def commit(self, version: str, command: str | None = None) -> None:
        """Write the manifest into the staging folder and put the output in place.

        Raises InputError when, during the run, the target changed so that it may no
        longer be written (a user's file appeared in it, say); nothing is touched then.
        """
        assert self.staging is not None, "commit() outside the context"
        written = listing(self.staging)
        manifest = {"tool": TOOL, "version": version, "generated_utc": timestamp_text(self.when),
                    "command": command if command is not None else shlex.join(["egressmargin", *sys.argv[1:]]),
                    "written": written}
        (self.staging / MANIFEST_NAME).write_text(json.dumps(manifest, indent=2) + "\n", encoding="utf-8")
        plan = inspect_target(self.given, self.inputs, self.force, purpose=self.purpose)
        with signals_held():
            if plan.keep or self.home == self.out:
                self._merge(plan)
            else:
                self._swap(plan)
            self.committed = True
        if self._aside is not None:
            why = remove_tree(self._aside)
            if why is not None:
                self.leftovers.append((self._aside, why))
            self._aside = None

    def leftover_warnings(self) -> list[Problem]:
        """Warnings naming the set-aside or staging folders that could not be removed."""
        return [Problem(str(p), f"the earlier output set aside here could not be removed ({why}); the new output "
                        f"is in place at '{self.given}'. Remove this folder yourself (a later run to the same "
                        "--out tries again)", warning=True) for p, why in self.leftovers]

    def _set_aside_folder(self) -> Path:
        return Path(tempfile.mkdtemp(prefix=_hidden(self.out, f"{_OLD_TAG}-{os.getpid()}-"), dir=self.home))

    def _swap(self, plan: Plan) -> None:
        if plan.kind != "new":
            self._aside = self._set_aside_folder()
            os.rename(self.out, self._aside / "old")
        try:
            os.rename(self.staging, self.out)
        except BaseException:
            if self._aside is not None:
                os.rename(self._aside / "old", self.out)
            raise
        self.staging = None

    def _merge(self, plan: Plan) -> None:
        """Replace the tool's own entries of an earlier output; keep the user's (``plan.keep``).

        Every rename is recorded and undone in reverse order if one fails, so the folder is
        either the earlier output or the new one, with the user's entries where they were.
        """
        new = listing(self.staging)
        keep = set(plan.keep)
        clash = [e for e in new if e in keep or (not e.endswith("/") and e + "/" in keep)]
        if clash:
            raise _refuse(f"'{self.given}' now holds {_some(clash)}, which egressmargin did not write but this run "
                          "writes; move or rename it first; nothing was changed")
        self._aside = aside = self._set_aside_folder()
        moves: list[tuple[Path, Path]] = []

        def move(src: Path, dst: Path) -> None:
            os.rename(src, dst)
            moves.append((src, dst))
        try:
            for e in [e for e in plan.tool_entries if not e.endswith("/")] + [MANIFEST_NAME]:
                src = self.out / e
                if src.exists() or src.is_symlink():
                    (aside / e).parent.mkdir(parents=True, exist_ok=True)
                    move(src, aside / e)
            _move_into(self.staging, self.out, move)
        except BaseException:
            for src, dst in reversed(moves):
                dst.parent.mkdir(parents=True, exist_ok=True)
                os.rename(dst, src)
            raise
        for e in sorted((e for e in plan.tool_entries if e.endswith("/")), key=len, reverse=True):
            if (self.out / e).is_dir() and not any((self.out / e).iterdir()):
                (self.out / e).rmdir()     # an old folder of the tool's that nothing uses now
        shutil.rmtree(self.staging, ignore_errors=True)
        self.staging = None


def _move_into(src: Path, dst: Path, move) -> None:
    """Move every entry of ``src`` into the existing folder ``dst`` with ``move(a, b)``, merging folders."""
    for p in sorted(src.iterdir()):
        target = dst / p.name
        if target.is_dir() and not target.is_symlink() and p.is_dir():
            _move_into(p, target, move)
        elif target.exists() or target.is_symlink():
            raise FileExistsError(errno.EEXIST, "exists", str(target))
        else:
            move(p, target)


def claim(out: Path, inputs: Iterable[Path] = (), force: bool = False, purpose: str | None = None) -> OutputFolder:
    """Check ``out`` (no writes) and return the folder to claim with ``with``.

    Raises InputError before anything is written when ``out`` may not be written (see
    :func:`inspect_target`) or ``SOURCE_DATE_EPOCH`` is malformed.
    """
    inputs = tuple(Path(i) for i in inputs if i is not None)
    try:
        plan = inspect_target(Path(out), inputs, force, purpose=purpose)
    except OSError as exc:            # an unreadable folder, say
        problem = user_os_error(exc, Path(out))
        if problem is None:
            raise
        raise problem from None
    return OutputFolder(plan, Path(out), inputs, force, run_time(), purpose)


def _usual_permissions(folder: Path) -> None:
    """A staging folder gets the permissions of a folder made with mkdir (mkdtemp makes it 0700),
    so the output that replaces it is readable as the user's umask allows."""
    mask = os.umask(0)
    os.umask(mask)
    os.chmod(folder, 0o777 & ~mask)
