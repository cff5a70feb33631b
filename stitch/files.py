"""Safe output files: nothing half-written, nothing replaced by surprise.

Every output is written under a hidden temporary name in its target folder and
renamed over the final name only when complete (``os.replace`` is atomic on
one file system). Existing outputs are refused unless ``overwrite`` is given.

A run that writes several files (mosaic, world file, report) stages them
(:func:`staged`): inside the ``with`` block every :func:`atomic_path` keeps
its finished temporary file instead of renaming it, and the whole set is
renamed at the end, so with ``overwrite`` the old set is replaced only once
every new file is complete, and a failure leaves it intact. The run also
holds an advisory lock on its output (:func:`output_lock`), so a second run
on the same output refuses at start instead of racing the first; holding
it, the run removes temporary files that an interrupted run left behind.
"""

from __future__ import annotations

import contextlib
import contextvars
import logging
import os
import secrets
from pathlib import Path

from .errors import OutputError, OutputExistsError

__all__ = ["atomic_path", "check_outputs", "output_lock", "readable_path", "remove_stale_partials", "retire",
           "staged", "write_bytes_atomic", "write_text_atomic"]

log = logging.getLogger(__name__)

#: Marker in temporary names; also how leftovers of a killed run are recognised.
PARTIAL_TAG = ".stitch-partial"

#: Ending of the lock file beside an output.
LOCK_TAG = ".stitch-lock"

_STAGE = contextvars.ContextVar("stitch_output_stage", default=None)


class _Stage:
    """Finished temporary files waiting to be renamed together."""

    def __init__(self, overwrite):
        self.overwrite = overwrite
        self.pending = []  # (temporary, final)
        self.retired = []  # old outputs this set no longer has

    def commit(self):
        for _, final in self.pending:
            if not self.overwrite and final.exists():
                raise OutputExistsError(f"output {str(final)!r} appeared while writing; not replaced")
        while self.pending:
            os.replace(*self.pending[0])
            self.pending.pop(0)
        while self.retired:
            self.retired.pop().unlink(missing_ok=True)

    def discard(self):
        for tmp, _ in self.pending:
            with contextlib.suppress(OSError):
                tmp.unlink()
        self.pending.clear()
        self.retired.clear()


@contextlib.contextmanager
def staged(*, overwrite=False):
    """Rename every file written by :func:`atomic_path` inside the block
    together when it ends; on any exception remove them all and leave the
    old outputs as they were."""
    stage = _Stage(overwrite)
    token = _STAGE.set(stage)
    try:
        yield
    except BaseException:
        _STAGE.reset(token)
        stage.discard()
        raise
    _STAGE.reset(token)
    try:
        stage.commit()
    except OutputError:
        raise
    except OSError as exc:
        raise OutputError(f"cannot rename the finished outputs into place: {exc}") from exc
    finally:
        stage.discard()


def readable_path(path):
    """Where an output can be read now: its finished temporary file while
    :func:`staged` holds it back, else ``path`` itself."""
    stage = _STAGE.get()
    path = Path(path)
    if stage is not None:
        for tmp, final in stage.pending:
            if final == path:
                return tmp
    return path


@contextlib.contextmanager
def output_lock(path):
    """Hold an advisory lock on an output for a run's duration.

    Raises
    ------
    OutputError
        Another run holds the lock.
    """
    try:
        import fcntl
    except ImportError:  # pragma: no cover - no advisory locks (Windows): no check
        yield
        return
    path = Path(path)
    lock = path.with_name(f".{path.name}{LOCK_TAG}")
    while True:
        fd = os.open(lock, os.O_RDWR | os.O_CREAT, 0o644)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            os.close(fd)
            raise OutputError(f"another stitch run is writing {str(path)!r}; wait for it to finish or choose "
                              "another output") from None
        try:
            same = os.fstat(fd).st_ino == os.stat(lock).st_ino
        except FileNotFoundError:
            same = False
        if same:
            break
        os.close(fd)  # the holder removed the file as we opened it: try again
    try:
        yield
    finally:
        with contextlib.suppress(OSError):
            lock.unlink()
        os.close(fd)


def remove_stale_partials(paths):
    """Remove temporary files of these outputs left by an interrupted run
    (call while holding the output's lock); returns their names."""
    removed = []
    for path in map(Path, paths):
        folder = path.parent if str(path.parent) else Path(".")
        if not folder.is_dir():
            continue
        for stale in folder.glob(f".{path.name}.*{PARTIAL_TAG}*"):
            with contextlib.suppress(OSError):
                stale.unlink()
                removed.append(stale.name)
    if removed:
        log.warning("removed %d temporary file(s) left by an interrupted run: %s", len(removed),
                    ", ".join(sorted(removed)[:5]))
    return removed


def check_outputs(paths, *, overwrite=False):
    """Refuse before any work if an output exists or its folder is unusable.

    Raises
    ------
    OutputExistsError
        An output exists and ``overwrite`` is False.
    OutputError
        The folder of an output does not exist or is not writable.
    """
    for path in map(Path, paths):
        folder = path.parent if str(path.parent) else Path(".")
        if not folder.is_dir():
            raise OutputError(f"folder {str(folder)!r} for output {path.name!r} does not exist; create it first")
        if not os.access(folder, os.W_OK):
            raise OutputError(f"folder {str(folder)!r} is not writable; choose another output path")
        if path.is_dir():
            raise OutputError(f"output {str(path)!r} is a folder; give a file name")
        if path.exists() and not overwrite:
            raise OutputExistsError(f"output {str(path)!r} exists and won't be replaced without --overwrite")


@contextlib.contextmanager
def atomic_path(path, *, overwrite=False):
    """Yield a temporary path beside ``path``; rename it to ``path`` on success.

    On any exception (including KeyboardInterrupt) the temporary file is
    removed and ``path`` is left as it was. Inside :func:`staged`, the
    rename waits for the end of the block.
    """
    path = Path(path)
    check_outputs([path], overwrite=overwrite)
    tmp = path.with_name(f".{path.name}.{secrets.token_hex(4)}{PARTIAL_TAG}")
    stage = _STAGE.get()
    try:
        yield tmp
        if stage is not None:  # renamed with the rest of the set
            stage.pending.append((tmp, path))
            return
        if not overwrite and path.exists():
            raise OutputExistsError(f"output {str(path)!r} appeared while writing; not replaced")
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise


def retire(path, *, overwrite=False):
    """Remove an old output that the set being written no longer has (a
    world file beside a mosaic now in pixel space), so that no stale sidecar
    describes the new file. Only with ``overwrite`` (without it, such a file
    was refused before anything was written); inside :func:`staged`, when the
    set is renamed into place."""
    path = Path(path)
    if not overwrite or not path.exists():
        return
    stage = _STAGE.get()
    if stage is not None:
        stage.retired.append(path)
    else:
        path.unlink(missing_ok=True)


def write_bytes_atomic(path, data, *, overwrite=False):
    """Write ``data`` to ``path`` through a temporary file."""
    with atomic_path(path, overwrite=overwrite) as tmp:
        try:
            with open(tmp, "wb") as fh:
                fh.write(data)
                fh.flush()
                os.fsync(fh.fileno())
        except OSError as exc:
            raise OutputError(f"cannot write {str(path)!r}: {exc.strerror}") from exc
    return Path(path)


def write_text_atomic(path, text, *, overwrite=False):
    """Write ``text`` (UTF-8, LF line ends) to ``path`` through a temporary file."""
    return write_bytes_atomic(path, text.encode("utf-8"), overwrite=overwrite)
