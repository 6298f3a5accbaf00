"""Output safety and what reaches the terminal.

Outputs never replace anything but a regular file (devices and named pipes are written
straight to), never an input nor a file an input includes (whatever name leads to it:
symlinks, hard links, ``..``), never a ``.dcn`` name unless ``--allow-dcn-output``; every
regular output goes through a temporary name. Control characters and bidi controls are
shown escaped in every text output and message; JSON keeps the exact strings; lines of a
file outside the circuit's folder are never echoed.

Whatever user runs the suite (CI runs as root), no test writes to a real device except
``/dev/null``, and that only after the writer has judged that it would write straight to it.
"""

import json
import os
import shutil
import socket
import stat
import subprocess
import sys
from pathlib import Path

import pytest

from dcnet import files
from dcnet.cli import main
from dcnet.display import shown, shown_json, source_lines

ROOT = Path(__file__).resolve().parent.parent
CABIN = ROOT / "circuits" / "cabin.dcn"
CYCLE = ROOT / "circuits" / "cabin-cycle.dcn"

SMALL = "cell A a gnd emf=12V r=0.01Ohm\nload L a gnd r=1Ohm\nground gnd\n"
ESC, RLO, BEL = "\x1b", "\u202e", "\x07"


def run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def no_temporaries(folder: Path) -> bool:
    return not [p.name for p in folder.iterdir() if p.name.endswith(".tmp")]


def snapshot(*paths):
    return {p: (p.read_bytes(), os.lstat(p).st_ino) for p in paths}


@pytest.fixture
def site(tmp_path):
    """A circuit that includes a file not named .dcn, and a second, unrelated circuit."""
    (tmp_path / "parts.txt").write_text("let r_load = 1 Ohm\n")
    (tmp_path / "main.dcn").write_text(
        'title "site"\ninclude "parts.txt"\ncell A a gnd emf=12V r=0.01Ohm\nload L a gnd r=r_load\nground gnd\n'
    )
    shutil.copy(CABIN, tmp_path / "cabin.dcn")
    return tmp_path


# ------------------------------------------------------------- never an input
def test_multi_file_output_never_overwrites_a_file_an_input_includes(capsys, site):
    before = snapshot(site / "parts.txt")
    for cmd in ("solve", "check"):
        code, _, err = run(capsys, cmd, site / "main.dcn", site / "cabin.dcn", "-o", site / "parts.txt")
        assert code == 2 and "refusing to write over the input file" in err and "parts.txt" in err
        assert snapshot(site / "parts.txt") == before
    # the same through --format jsonl, and for a folder run of the whole folder
    code, _, err = run(capsys, "solve", site, "--format", "jsonl", "-o", site / "parts.txt")
    assert code == 2 and snapshot(site / "parts.txt") == before
    assert no_temporaries(site)


def test_a_refused_input_still_protects_what_it_read(capsys, site):
    # main.dcn is refused (its include is not UTF-8, or holds a mistake): the include is still an input
    for body in (b"let r_load = 1 \xff Ohm\n", b"let r_load = 1 mohms\n"):
        (site / "parts.txt").write_bytes(body)
        code, _, err = run(capsys, "solve", site / "main.dcn", site / "cabin.dcn", "-o", site / "parts.txt")
        assert code == 2 and "refusing to write over the input file" in err
        assert (site / "parts.txt").read_bytes() == body


def test_other_names_of_an_input_are_refused(capsys, site):
    target = site / "parts.txt"
    before = snapshot(target, site / "main.dcn")
    os.symlink("parts.txt", site / "link.txt")
    os.link(target, site / "hard.txt")
    (site / "sub").mkdir()
    for name in ("link.txt", "hard.txt", "sub/../parts.txt", "./parts.txt", str(target)):
        code, _, err = run(capsys, "solve", site / "main.dcn", "-o", site / name if not name.startswith("/") else name)
        assert code == 2 and "refusing to write over the input file" in err, name
    os.chdir(site)  # relative input, absolute output naming the same file
    try:
        code, _, err = run(capsys, "solve", "main.dcn", "-o", str(site / "main.dcn"))
    finally:
        os.chdir(ROOT)
    assert code == 2 and "refusing to write over the input file" in err
    assert snapshot(target, site / "main.dcn") == before and no_temporaries(site)


def test_standard_input_redirected_from_a_file_is_an_input(site):
    # dcnet solve - -o /dev/stdin < circuit.txt: /dev/stdin leads to the circuit itself
    circuit = site / "circuit.txt"
    circuit.write_text(SMALL)
    with open(circuit) as fh:
        proc = subprocess.run(
            [sys.executable, "-m", "dcnet", "solve", "-", "-o", "/dev/stdin"],
            stdin=fh,
            capture_output=True,
            text=True,
            cwd=site,
        )
    assert proc.returncode == 2 and "refusing to write over the input file standard input" in proc.stderr
    assert "Traceback" not in proc.stderr
    assert circuit.read_text() == SMALL


# ---------------------------------------------------------- circuit file names
def test_outputs_never_take_a_circuit_name_unless_asked(capsys, site):
    other = site / "cabin.dcn"
    before = snapshot(other)
    code, _, err = run(capsys, "solve", site / "main.dcn", "-o", other)
    assert code == 2 and "the extension of circuit files" in err and "--allow-dcn-output" in err
    code, _, err = run(capsys, "cycle", CYCLE, "--step", "30min", "--series", other)
    assert code == 2 and "the extension of circuit files" in err
    code, _, err = run(capsys, "solve", site / "main.dcn", "-o", site / "NEW.DCN")  # any case
    assert code == 2 and not (site / "NEW.DCN").exists()
    os.symlink("cabin.dcn", site / "table.txt")  # a harmless name leading to a circuit
    code, _, err = run(capsys, "solve", site / "main.dcn", "-o", site / "table.txt")
    assert code == 2 and "circuit extension" in err
    assert snapshot(other) == before
    # asked for explicitly: written (still through a temporary name)
    code, _, _ = run(capsys, "solve", site / "main.dcn", "-o", site / "copy.dcn", "--allow-dcn-output")
    assert code == 0 and (site / "copy.dcn").read_text().startswith("dcnet  site")
    assert no_temporaries(site)


def test_every_command_judges_its_outputs_before_the_work(capsys, site):
    main_dcn = site / "main.dcn"
    cases = [
        ["solve", main_dcn, "-o", site / "x.dcn"],
        ["check", main_dcn, "-o", site / "x.dcn"],
        ["report", main_dcn, "-o", site / "x.dcn"],
        ["formula", main_dcn, "--for", "L.current", "-o", site / "x.dcn"],
        ["equivalent", main_dcn, "--between", "a", "gnd", "-o", site / "x.dcn"],
        ["sweep", CABIN, "--vary", "run=1m..2m:2", "--show", "A.current", "--plot", site / "x.dcn"],
        ["spread", ROOT / "circuits" / "shed-bank-spread.dcn", "--samples", "10", "--plot", site / "x.dcn"],
        ["cycle", CYCLE, "--plot", site / "x.dcn"],
        ["cycle", CYCLE, "--series", site / "s.csv", "-o", site / "s.csv"],  # two outputs, one file
    ]
    for argv in cases:
        code, out, err = run(capsys, *argv)
        assert code == 2 and out == "" and "Traceback" not in err, argv
    assert sorted(p.name for p in site.iterdir()) == ["cabin.dcn", "main.dcn", "parts.txt"]


# --------------------------------------------------- special files and folders
def test_named_pipe_is_written_straight_to_and_stays_a_pipe(capsys, tmp_path):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    # the reader opens first (non-blocking), so the writer never waits and a fault cannot hang the test
    rd = os.open(fifo, os.O_RDONLY | os.O_NONBLOCK)
    try:
        code, out, err = run(capsys, "solve", CABIN, "--format", "json", "-o", fifo)
        data = b""
        while chunk := os.read(rd, 1 << 16):
            data += chunk
    finally:
        os.close(rd)
    assert code == 0 and out == ""
    assert stat.S_ISFIFO(os.lstat(fifo).st_mode)
    assert json.loads(data)["title"].startswith("Hillside")
    assert no_temporaries(tmp_path)


def test_character_device_is_written_straight_to_and_stays_a_device(capsys, tmp_path):
    # a device node of our own (the null device's numbers) inside tmp_path, never one in /dev
    node = tmp_path / "null"
    try:
        os.mknod(node, stat.S_IFCHR | 0o666, os.makedev(1, 3))
        os.close(os.open(node, os.O_WRONLY))
    except (OSError, AttributeError) as exc:
        pytest.skip(f"cannot make or open a device node here: {exc}")
    before = os.lstat(node)
    code, out, _ = run(capsys, "solve", CABIN, "-o", node)
    after = os.lstat(node)
    assert code == 0 and out == ""
    assert stat.S_ISCHR(after.st_mode) and after.st_rdev == before.st_rdev and after.st_ino == before.st_ino
    assert no_temporaries(tmp_path)


def test_dev_null_stays_the_null_device(capsys):
    # judged first: only if the writer says it writes straight to it does the command run
    how, _, _ = files._judge("/dev/null", {}, False)
    assert how == "straight"
    code, out, _ = run(capsys, "solve", CABIN, "-o", "/dev/null")
    st = os.stat("/dev/null")
    assert code == 0 and out == ""
    assert stat.S_ISCHR(st.st_mode) and st.st_rdev == os.makedev(1, 3)


def test_folders_sockets_and_missing_folders_are_refused_clearly(capsys, tmp_path):
    sock_path = tmp_path / "s.sock"
    sock = socket.socket(socket.AF_UNIX)
    try:
        sock.bind(str(sock_path))
        cases = {
            f"{tmp_path}": "it is a folder",
            f"{sock_path}": "it is a socket",
            f"{tmp_path}/missing/out.txt": "does not exist",
            f"{tmp_path}/missing/../out.txt": "does not exist",  # the system needs the folder 'missing'
            f"{tmp_path}/new/": "as a folder's does",
        }
        for target, words in cases.items():
            code, _, err = run(capsys, "solve", CABIN, "-o", target)
            assert code == 2 and words in err and "Traceback" not in err, target
        assert stat.S_ISSOCK(os.lstat(sock_path).st_mode)
    finally:
        sock.close()
    assert not (tmp_path / "out.txt").exists()


def test_regular_output_replaced_atomically_keeping_its_permissions(capsys, tmp_path):
    out = tmp_path / "result.txt"
    out.write_text("old")
    os.chmod(out, 0o640)
    old_ino = os.lstat(out).st_ino
    code, _, _ = run(capsys, "solve", CABIN, "-o", out)
    assert code == 0 and out.read_text().startswith("dcnet  Hillside cabin")
    assert stat.S_IMODE(os.lstat(out).st_mode) == 0o640
    assert os.lstat(out).st_ino != old_ino  # a new file renamed into place, not the old one truncated
    assert no_temporaries(tmp_path)
    # an output through a symlink replaces the file it leads to; the link stays a link
    os.symlink("result.txt", tmp_path / "latest")
    code, _, _ = run(capsys, "solve", CABIN, "--format", "json", "-o", tmp_path / "latest")
    assert code == 0 and os.path.islink(tmp_path / "latest") and json.loads(out.read_text())["title"]


@pytest.mark.skipif(os.geteuid() == 0, reason="root may write any file")
def test_read_only_file_is_not_replaced(capsys, tmp_path):
    out = tmp_path / "keep.txt"
    out.write_text("keep")
    os.chmod(out, 0o444)
    code, _, err = run(capsys, "solve", CABIN, "-o", out)
    assert code == 2 and "read-only" in err and out.read_text() == "keep"


def test_dash_output_is_standard_output(capsys, tmp_path):
    os.chdir(tmp_path)
    try:
        code, out, _ = run(capsys, "solve", CABIN, "-o", "-")
    finally:
        os.chdir(ROOT)
    assert code == 0 and out.startswith("dcnet  Hillside cabin") and not (tmp_path / "-").exists()


def test_writer_api_refuses_the_same_things(tmp_path):
    from dcnet.errors import InputError

    inp = tmp_path / "in.txt"
    inp.write_text("x")
    with pytest.raises(InputError, match="refusing to write over the input file"):
        files.write_output(tmp_path / "in.txt", "y", protect=[str(inp)])
    with pytest.raises(InputError, match="circuit"):
        files.write_output(tmp_path / "a.dcn", "y")
    files.write_output(tmp_path / "a.dcn", "y", allow_circuit=True)
    with pytest.raises(InputError, match="two outputs"):
        files.check_outputs([tmp_path / "o.txt", tmp_path / "." / "o.txt"])
    files.check_outputs(["/dev/null", "/dev/null"])  # a device may take several outputs
    assert inp.read_text() == "x" and (tmp_path / "a.dcn").read_text() == "y"


# ----------------------------------------------------- what reaches the terminal
def test_shown_escapes_controls_and_bidi_and_nothing_else():
    assert shown("a\x1b[31mb") == "a\\x1b[31mb"
    assert shown("x\u202ey\u2066z\u200f") == "x\\u202ey\\u2066z\\u200f"
    assert shown("\x07\x08\r\x7f\x85\x9b") == "\\x07\\x08\\x0d\\x7f\\x85\\x9b"
    assert shown("tab\tand\nnewline µΩ² – ok") == "tab\tand\nnewline µΩ² – ok"
    once = shown("\x1b\u202e")
    assert shown(once) == once  # already safe text stays as it is
    # JSON: the same strings when read back (json's own escapes), nothing raw
    s = "t\x1b\u202e\x9b"
    text = shown_json(json.dumps({"t": s}, ensure_ascii=False))
    assert json.loads(text)["t"] == s and not any(c in text for c in s[1:])


def _raw(text: str) -> bool:
    return any(c in text for c in (ESC, RLO, "\x9b", BEL))


def test_titles_are_shown_escaped_in_every_text_output_and_exact_in_json(capsys, tmp_path):
    title = f"{ESC}[2J{ESC}]0;owned{BEL} bank {RLO}txt.exe"
    src = tmp_path / "t.dcn"
    src.write_text(f'title "{title}"\n{SMALL}')
    for argv in (
        ["solve", src],
        ["solve", src, "--format", "markdown"],
        ["solve", src, "--format", "csv"],
        ["solve", src, src],
        ["check", src],
        ["check", src, src],
        ["check", src, "--format", "markdown"],
        ["report", src],
        ["report", src, "--format", "svg"],
        ["equivalent", src, "--between", "a", "gnd"],
        ["formula", src, "--for", "L.current", "--keep", "L.r"],
    ):
        code, out, err = run(capsys, *argv)
        assert code in (0, 1), (argv, err)
        assert not _raw(out) and not _raw(err), argv
    code, out, _ = run(capsys, "solve", src)
    assert "\\x1b[2J\\x1b]0;owned\\x07 bank \\u202etxt.exe" in out
    for argv in (
        ["solve", src, "--format", "json"],
        ["check", src, "--format", "json"],
        ["solve", src, src, "--format", "jsonl"],
    ):
        code, out, _ = run(capsys, *argv)
        assert not _raw(out)
        first = json.loads(out.splitlines()[0] if argv[-1] == "jsonl" else out)
        got = first.get("title") or first["files"][0]["title"]
        assert got == title  # exact
    # written to a file: the same as on the terminal
    code, _, _ = run(capsys, "solve", src, "-o", tmp_path / "out.txt")
    assert not _raw((tmp_path / "out.txt").read_text())


def test_error_messages_show_controls_escaped_with_the_caret_under_the_span(capsys, tmp_path):
    src = tmp_path / "e.dcn"
    src.write_text(f"cell A a gnd emf=12V r=1{ESC}[8m{RLO}mohms\nground gnd\n")
    code, _, err = run(capsys, "solve", src)
    assert code == 2 and not _raw(err)
    lines = err.splitlines()
    echoed = next(ln for ln in lines if ln.startswith("    cell"))
    caret = lines[lines.index(echoed) + 1]
    start = caret.index("^")
    assert echoed[start:].startswith("\\x1b"), (echoed, caret)  # under the first character shown
    # a file name with an escape sequence, and an argument the parser rejects
    odd = tmp_path / f"x{ESC}[31m.dcn"
    odd.write_text("cell A a gnd emf=12V r=1mohms\nground gnd\n")
    code, _, err = run(capsys, "solve", odd)
    assert code == 2 and "x\\x1b[31m.dcn" in err and not _raw(err)
    code, _, err = run(capsys, "solve", odd, src)
    assert code == 2 and not _raw(err)
    with pytest.raises(SystemExit):
        main(["solve", str(src), f"--{ESC}[31m"])
    assert not _raw(capsys.readouterr().err)


@pytest.mark.parametrize("breaker", ["\x0c", "\x0b", "\x1c", "\x85", "\u2028", "\r"])
def test_the_echoed_line_is_the_line_the_error_names(capsys, tmp_path, breaker):
    # str.splitlines breaks at these, the grammar does not: the echo must not slip a line
    src = tmp_path / "c.dcn"
    src.write_text(
        f"let a = 1 Ohm  # note {breaker} more\ncell A a gnd emf=12V r=0.01Ohm\nload L a gnd r=1mohms\nground gnd\n",
        newline="",
    )
    code, _, err = run(capsys, "solve", src)
    assert code == 2 and ":3:" in err.splitlines()[0]
    assert "    load L a gnd r=1mohms" in err
    assert source_lines("a\r\nb\x0cc\nd\n") == ["a", "b\x0cc", "d"]


def test_lines_outside_the_folder_are_never_echoed(capsys, tmp_path):
    site, lib = tmp_path / "site", tmp_path / "lib"
    site.mkdir()
    lib.mkdir()
    faults = {
        "value": "let r_x = 1 mohms  # SECRET\n",
        "syntax": "cell A9 a gnd emf=12V r=1Ohm oops  # SECRET\n",
        "block body, used inside": "block B (x, y)\n  resistor R x y r=1 mohms  # SECRET\nend\n",
        "nested include": 'include "deeper.txt"\n',
    }
    (lib / "deeper.txt").write_text("let q = 2 furlongs  # SECRET\n")
    for what, body in faults.items():
        (lib / "parts.txt").write_text(body)
        use = "use U1 B (a, gnd)\n" if "block" in what else ""
        (site / "main.dcn").write_text(f'include "../lib/parts.txt"\n{SMALL}{use}')
        code, _, err = run(capsys, "solve", site / "main.dcn", "--allow-outside-includes")
        assert code == 2 and "lib/" in err, what
        assert "SECRET" not in err, what
        code, _, err = run(capsys, "check", site / "main.dcn", site / "main.dcn", "--allow-outside-includes")
        assert "SECRET" not in err, what
    # a line of the circuit's own folder is still echoed
    (site / "main.dcn").write_text(SMALL + "let z = 1 mohms  # OWN LINE\n")
    code, _, err = run(capsys, "solve", site / "main.dcn", "--allow-outside-includes")
    assert "OWN LINE" in err
