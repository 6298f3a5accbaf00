"""Reading the list of inputs and writing outputs without ever losing a file.

Every file dcnet writes goes to a temporary name in the same folder and is
renamed into place, so a crash leaves either the old file or the new one,
never half of one; and dcnet refuses to write over any of its own inputs.
"""

from __future__ import annotations

import glob
import os
import tempfile
from pathlib import Path

from .errors import InputError

__all__ = ["expand_inputs", "atomic_write_text", "atomic_write_bytes", "CIRCUIT_SUFFIX"]

CIRCUIT_SUFFIX = ".dcn"


def expand_inputs(items: list[str]) -> list[str]:
    """Files as given; folders become their ``*.dcn`` files (recursively, sorted); unmatched
    patterns with ``*``/``?`` are expanded here for shells that do not."""
    out: list[str] = []
    for item in items:
        if item == "-":
            out.append(item)
            continue
        p = Path(item)
        if p.is_dir():
            found = sorted(str(f) for f in p.rglob(f"*{CIRCUIT_SUFFIX}") if f.is_file())
            if not found:
                raise InputError(f"the folder {item} holds no {CIRCUIT_SUFFIX} files")
            out.extend(found)
        elif not p.exists() and any(ch in item for ch in "*?["):
            found = sorted(glob.glob(item, recursive=True))
            if not found:
                raise InputError(f"no files match {item}")
            out.extend(found)
        else:
            out.append(item)
    return out


def atomic_write_text(path: str | os.PathLike, text: str, protect: list[str] | tuple[str, ...] = ()) -> None:
    """Write ``text`` to ``path`` through a temporary file and a rename.

    Raises :class:`InputError` if ``path`` is one of the ``protect`` files (the inputs).
    """
    atomic_write_bytes(path, text.encode("utf-8"), protect)


def _mode_for(path: Path) -> int:
    """The file mode a plain write would give: the old file's, else 0666 less the umask."""
    try:
        return path.stat().st_mode & 0o777
    except OSError:
        mask = os.umask(0)
        os.umask(mask)
        return 0o666 & ~mask


def atomic_write_bytes(path: str | os.PathLike, data: bytes, protect: list[str] | tuple[str, ...] = ()) -> None:
    """Write ``data`` to ``path`` through a temporary file and a rename (as :func:`atomic_write_text`)."""
    target = Path(path)
    resolved = target.resolve()
    for p in protect:
        if p != "-" and Path(p).resolve() == resolved:
            raise InputError(f"refusing to write over the input file {p}", hint="choose another output name")
    folder = resolved.parent
    if not folder.is_dir():
        raise InputError(f"the folder {folder} does not exist")
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.chmod(tmp, _mode_for(resolved))
        os.replace(tmp, resolved)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
