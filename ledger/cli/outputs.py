"""Output files and folders named on the command line: checked before any work, written
without a traceback.

A command checks every output it was given before it computes anything (so a bad path
writes nothing, not even kept results), and wraps each write so that an error the check
could not foresee (a full disk, a read-only file system) is still one line and exit 2.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from ledger.errors import InputError


def _first_existing(folder: Path) -> Path:
    probe = folder
    while not probe.exists() and probe != probe.parent:
        probe = probe.parent
    return probe


def _check_place(folder: Path, option: str, path: Path) -> None:
    probe = _first_existing(folder)
    if not probe.is_dir():
        raise InputError(option, str(path), f"is under {probe}, which is a file, not a folder")
    if not os.access(probe, os.W_OK | os.X_OK):
        raise InputError(option, str(path), f"cannot be written: folder {probe} is not writable")


def output_file(path: Path | None, option: str) -> Path | None:
    """Check a file to be written: not a folder, under folders that exist or can be made, writable."""
    if path is None:
        return None
    if path.is_dir():
        raise InputError(option, str(path), "is a folder; give a file name inside it")
    _check_place(path.parent, option, path)
    if path.exists() and not os.access(path, os.W_OK):
        raise InputError(option, str(path), "cannot be written (the file is read-only)")
    if not path.exists() and path.parent.is_dir():
        # Permissions alone do not tell (root passes every check; /proc refuses everyone):
        # make the file and take it away again.
        with writing(path, option):
            path.touch()
            path.unlink()
    return path


def output_folder(path: Path | None, option: str) -> Path | None:
    """Check a folder to be written into: a folder (or not there yet, under one), writable."""
    if path is None:
        return None
    if path.exists() and not path.is_dir():
        raise InputError(option, str(path), "is a file, not a folder")
    _check_place(path, option, path)
    return path


@contextmanager
def writing(path: Path, option: str) -> Iterator[None]:
    """Turn an operating-system error while writing ``path`` into one line naming the option."""
    try:
        yield
    except OSError as exc:
        reason = exc.strerror or type(exc).__name__
        raise InputError(option, str(path), f"cannot be written ({reason})") from None
