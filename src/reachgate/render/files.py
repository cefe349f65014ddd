"""Output files: never over an input, always whole (temporary file in the same folder, renamed).

Every file a command writes goes through ``atomic_output``: the text or bytes go to a
temporary file beside the target, are flushed to disk, and only then replace the target in
one rename (``os.replace``, atomic on POSIX and Windows within one file system). An
interrupted run or a full disk leaves the old file (or none), never half a file.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Iterable, Iterator, Mapping
from contextlib import contextmanager
from pathlib import Path
from typing import IO

from reachgate.errors import ReachgateError


def same_file(a: str | Path, b: str | Path) -> bool:
    """True when a and b name one file: same inode where both exist, else same resolved path."""
    a, b = Path(a), Path(b)
    try:
        return os.path.samefile(a, b)
    except OSError:  # one of them does not exist (yet)
        return a.resolve() == b.resolve()


def refuse_overwriting_inputs(
    outputs: Mapping[str, str | Path | None], inputs: Mapping[str, str | Path | None]
) -> None:
    """Raise ReachgateError when an output (option -> path) names an input (role -> path),
    or when two outputs name one file. None entries are skipped."""
    given = {option: Path(p) for option, p in outputs.items() if p is not None}
    sources = {role: Path(p) for role, p in inputs.items() if p is not None}
    for option, out in given.items():
        for role, source in sources.items():
            if same_file(out, source):
                raise ReachgateError(
                    f"{option} {out}: that is the {role}, an input of this command; "
                    "writing there would destroy it, choose another file"
                )
    names = list(given)
    for i, first in enumerate(names):
        for second in names[i + 1 :]:
            if same_file(given[first], given[second]):
                raise ReachgateError(
                    f"{first} and {second} both name {given[first]}; give each its own file"
                )


@contextmanager
def atomic_output(path: str | Path, *, binary: bool = False) -> Iterator[IO]:
    """Open a temporary file beside path for writing; on success it replaces path.

    Text mode writes UTF-8 with '\\n' line ends. Any OSError (folder missing, permission,
    disk full) becomes a ReachgateError naming path; the temporary file is removed.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    try:
        descriptor, temporary = tempfile.mkstemp(
            prefix=f".{path.name}.", suffix=".part", dir=folder
        )
    except OSError as error:
        raise _write_error(path, error) from None
    try:
        mode = "wb" if binary else "w"
        text_options = {} if binary else {"encoding": "utf-8", "newline": "\n"}
        with os.fdopen(descriptor, mode, **text_options) as handle:
            yield handle
            handle.flush()
            os.fsync(handle.fileno())
        _keep_mode(path, temporary)
        os.replace(temporary, path)
    except OSError as error:
        _remove_quietly(temporary)
        raise _write_error(path, error) from None
    except BaseException:
        _remove_quietly(temporary)
        raise


def write_text(path: str | Path, text: str) -> Path:
    """Write text (a final newline added if missing) to path atomically; returns path."""
    with atomic_output(path) as handle:
        handle.write(text if text.endswith("\n") else text + "\n")
    return Path(path)


def write_chunks(path: str | Path, chunks: Iterable[str]) -> Path:
    """Write the text pieces in order to path atomically; returns path."""
    with atomic_output(path) as handle:
        for chunk in chunks:
            handle.write(chunk)
    return Path(path)


def _keep_mode(path: Path, temporary: str) -> None:
    """Give the new file the old one's permissions, or the usual ones for a new file
    (mkstemp makes it private: 0o600)."""
    try:
        mode = path.stat().st_mode & 0o777
    except FileNotFoundError:
        umask = os.umask(0)
        os.umask(umask)
        mode = 0o666 & ~umask
    os.chmod(temporary, mode)


def _remove_quietly(temporary: str) -> None:
    try:
        os.unlink(temporary)
    except OSError:
        pass


def _write_error(path: Path, error: OSError) -> ReachgateError:
    reason = error.strerror or str(error)
    return ReachgateError(f"{path}: cannot write the file ({reason})")
