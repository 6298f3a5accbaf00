"""Reading the list of inputs and writing outputs without ever losing a file.

Every output dcnet writes goes through :func:`write_output`, the one writer:

- an existing regular file (or a new name) is written to a temporary name in the same
  folder and renamed into place, so a crash leaves either the old file or the new one,
  never half of one; the old file's permissions are kept;
- a terminal, another character device (``/dev/null``) or a named pipe is written straight
  to, as a shell redirection would: such a file is never replaced by a regular one;
- a folder, a block device, a socket or anything else is refused;
- the output is never an input, nor a file an input includes: identities (``st_dev`` and
  ``st_ino``, after following symlinks) are compared, so another name for an input — a
  symlink, a hard link, ``./`` or ``..`` in the path — is refused as well;
- a name ending in ``.dcn`` (the circuit extension) is refused unless the caller allows it
  (the command line's ``--allow-dcn-output``): an output there would be read as a circuit by
  the next folder run, and is usually a slip of the keyboard for an input.
"""

from __future__ import annotations

import glob
import os
import stat
import tempfile
from pathlib import Path

from .errors import InputError

__all__ = [
    "expand_inputs",
    "write_output",
    "check_outputs",
    "atomic_write_text",
    "atomic_write_bytes",
    "CIRCUIT_SUFFIX",
]

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


# ------------------------------------------------------------------ output
def _refuse(message: str, hint: str | None = None) -> None:
    raise InputError(message, hint=hint or "choose another output name")


def _identity(path) -> tuple[int, int] | None:
    """(st_dev, st_ino) of the file ``path`` leads to (symlinks followed), or None."""
    try:
        st = os.stat(path)
    except (OSError, ValueError):
        return None
    return (st.st_dev, st.st_ino)


def _guarded(protect) -> dict[tuple[int, int], str]:
    """The identities of the files never to be written over (inputs and what they include)."""
    out: dict[tuple[int, int], str] = {}
    for p in protect or ():
        if not p:
            continue
        if p in ("-", "<stdin>"):  # standard input, when a file is redirected to it
            try:
                st = os.fstat(0)
            except OSError:
                st = None
            if st is not None and stat.S_ISREG(st.st_mode):
                out.setdefault((st.st_dev, st.st_ino), "standard input")
            if p == "-":
                continue
        ident = _identity(p)
        if ident is not None:
            out.setdefault(ident, os.fspath(p))
    return out


def _circuit_name(name: str) -> bool:
    return name.lower().endswith(CIRCUIT_SUFFIX)


def _what(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISBLK(mode):
        return "a block device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def _judge(path, guarded: dict, allow_circuit: bool):
    """How ``path`` would be written: ("straight", name, stat) for a character device or a
    named pipe, ("replace", real path, stat or None) for a regular file or a new name;
    raises :class:`InputError` for anything dcnet must not write to."""
    name = os.fspath(path)
    if not name:
        _refuse("the output name is empty")
    if name == "-":
        _refuse("cannot write this output to -", hint="give a file name (only -o - means standard output)")
    if "\0" in name:
        _refuse("the output name holds a NUL character")
    try:
        st = os.stat(name)  # follows symlinks (also /proc/self/fd/N and /dev/stdout to what they stand for)
    except FileNotFoundError:
        st = None
    except NotADirectoryError:
        _refuse(f"cannot write {name}: a part of its path is not a folder")
    except OSError as exc:
        _refuse(f"cannot write {name}: {exc.strerror}")
    if st is not None:
        ident = (st.st_dev, st.st_ino)
        if ident in guarded:
            inp = guarded[ident]
            same = os.path.normpath(os.path.abspath(inp)) == os.path.normpath(os.path.abspath(name))
            also = "" if same else f" (the output {name} is another name for it)"
            _refuse(f"refusing to write over the input file {inp}{also}")
    if not allow_circuit and _circuit_name(name):
        _refuse(
            f"refusing to write an output to {name}: the name ends in {CIRCUIT_SUFFIX}, the extension of circuit files",
            hint=f"choose another name, or pass --allow-dcn-output if a {CIRCUIT_SUFFIX} output is really meant",
        )
    if st is not None:
        if stat.S_ISCHR(st.st_mode) or stat.S_ISFIFO(st.st_mode):
            return "straight", name, st
        if not stat.S_ISREG(st.st_mode):
            _refuse(
                f"cannot write {name}: it is {_what(st.st_mode)}",
                hint="outputs go to regular files, terminals and other character devices (/dev/null), and named pipes",
            )
        if not os.access(name, os.W_OK):  # a read-only file is not replaced behind its owner's back
            _refuse(f"cannot write {name}: permission denied (the file is read-only for you)")
    else:
        if name.endswith(os.sep):
            _refuse(f"cannot write {name}: the name ends in {os.sep}, as a folder's does")
        given = os.path.dirname(name) or os.curdir
        if not os.path.isdir(given):  # as the system walks the path (a/../b needs the folder a)
            _refuse(
                f"cannot write {name}: the folder {given} does not exist",
                hint="create the folder first, or choose another output name",
            )
    real = os.path.realpath(name)
    if not allow_circuit and _circuit_name(real):
        _refuse(
            f"refusing to write an output to {name}: it leads to {real}, a name with the circuit extension {CIRCUIT_SUFFIX}",
            hint=f"choose another name, or pass --allow-dcn-output if a {CIRCUIT_SUFFIX} output is really meant",
        )
    if _identity(real) != (None if st is None else (st.st_dev, st.st_ino)):
        _refuse(f"cannot write {name}: cannot tell which file it leads to")
    folder = os.path.dirname(real)
    if not os.path.isdir(folder):
        _refuse(
            f"cannot write {name}: the folder {folder} does not exist",
            hint="create the folder first, or choose another output name",
        )
    return "replace", real, st


def check_outputs(paths, protect=(), allow_circuit: bool = False) -> None:
    """Judge every output up front, before any work: each one as :func:`write_output` would
    now, and no two outputs the same file (a device or a pipe may take several)."""
    guarded = _guarded(protect)
    seen: dict = {}
    for p in paths:
        how, target, st = _judge(p, guarded, allow_circuit)
        if how == "straight":
            continue
        key = (st.st_dev, st.st_ino) if st is not None else target
        if key in seen:
            _refuse(
                f"{os.fspath(p)} is named for two outputs (also as {seen[key]})", hint="give each output its own name"
            )
        seen[key] = os.fspath(p)


def _write_straight(name: str, data: bytes) -> None:
    """Write to a character device or a named pipe as a shell redirection would (a pipe
    waits for its reader); never creates, truncates or replaces anything."""
    try:
        fd = os.open(name, os.O_WRONLY | getattr(os, "O_NOCTTY", 0) | getattr(os, "O_CLOEXEC", 0))
    except OSError as exc:
        _refuse(f"cannot write to {name}: {exc.strerror}")
    try:
        st = os.fstat(fd)
        if not (stat.S_ISCHR(st.st_mode) or stat.S_ISFIFO(st.st_mode)):
            _refuse(f"cannot write {name}: it changed while being opened")
        view = memoryview(data)
        while view:
            view = view[os.write(fd, view) :]
    except BrokenPipeError:
        raise  # the reader went away: as for standard output
    except OSError as exc:
        _refuse(f"cannot write to {name}: {exc.strerror}")
    finally:
        os.close(fd)


def _new_mode(st) -> int:
    """The old file's permissions; for a new file, those a plain write would give (0666 less the umask)."""
    if st is not None:
        return stat.S_IMODE(st.st_mode)
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def _replace(real: str, data: bytes, st, guarded: dict) -> None:
    folder, base = os.path.split(real)
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{base[:160]}.", suffix=".tmp", dir=folder)
    except OSError as exc:
        _refuse(
            f"cannot write {real}: no file can be made in {folder} ({exc.strerror})",
            hint="every output is first written to a temporary name in its folder: choose a folder you can write to",
        )
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
            os.fchmod(fh.fileno(), _new_mode(st))
            if st is not None and hasattr(os, "fchown"):
                try:
                    os.fchown(fh.fileno(), st.st_uid, st.st_gid)
                except OSError:
                    pass  # only the owner's own group, or root, may hand a file on: keep ours
        # a last look: the name may have been made into something else while we wrote
        now = _identity(real)
        if now is not None and (now in guarded or (st is not None and now != (st.st_dev, st.st_ino)) or st is None):
            _refuse(f"cannot write {real}: it changed while the output was being written")
        os.replace(tmp, real)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        if isinstance(exc, OSError) and not isinstance(exc, InputError):
            _refuse(f"cannot write {real}: {exc.strerror}")
        raise
    try:  # make the rename itself durable
        dfd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(dfd)
        finally:
            os.close(dfd)
    except OSError:
        pass


def write_output(path: str | os.PathLike, data: bytes | str, protect=(), allow_circuit: bool = False) -> None:
    """The one writer of dcnet's outputs (see the module's docstring for the rules).

    ``protect``: the files never to be written over (the inputs and every file they include);
    ``allow_circuit``: allow a name ending in ``.dcn``. Raises :class:`InputError` with the
    reason when the output may not or cannot be written.
    """
    if isinstance(data, str):
        data = data.encode("utf-8")
    guarded = _guarded(protect)
    how, target, st = _judge(path, guarded, allow_circuit)
    if how == "straight":
        _write_straight(target, data)
    else:
        _replace(target, data, st, guarded)


def atomic_write_text(path: str | os.PathLike, text: str, protect=(), allow_circuit: bool = False) -> None:
    """Write ``text`` (UTF-8) through :func:`write_output`."""
    write_output(path, text, protect, allow_circuit)


def atomic_write_bytes(path: str | os.PathLike, data: bytes, protect=(), allow_circuit: bool = False) -> None:
    """Write ``data`` through :func:`write_output`."""
    write_output(path, data, protect, allow_circuit)
