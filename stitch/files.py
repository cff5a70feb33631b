"""Safe output files: nothing half-written, nothing replaced by surprise.

Every output is written under a hidden temporary name in its target folder and
renamed over the final name only when complete (``os.replace`` is atomic on
one file system). Existing outputs are refused unless ``overwrite`` is given.
"""

from __future__ import annotations

import contextlib
import os
import secrets
from pathlib import Path

from .errors import OutputError, OutputExistsError

__all__ = ["atomic_path", "check_outputs", "write_bytes_atomic", "write_text_atomic"]

#: Marker in temporary names; also how leftovers of a killed run are recognised.
PARTIAL_TAG = ".stitch-partial"


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
        if path.exists() and not overwrite:
            raise OutputExistsError(f"output {str(path)!r} exists and won't be replaced without --overwrite")
        if path.is_dir():
            raise OutputError(f"output {str(path)!r} is a folder; give a file name")


@contextlib.contextmanager
def atomic_path(path, *, overwrite=False):
    """Yield a temporary path beside ``path``; rename it to ``path`` on success.

    On any exception (including KeyboardInterrupt) the temporary file is
    removed and ``path`` is left as it was.
    """
    path = Path(path)
    check_outputs([path], overwrite=overwrite)
    tmp = path.with_name(f".{path.name}.{secrets.token_hex(4)}{PARTIAL_TAG}")
    try:
        yield tmp
        if not overwrite and path.exists():
            raise OutputExistsError(f"output {str(path)!r} appeared while writing; not replaced")
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            tmp.unlink()
        raise


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
