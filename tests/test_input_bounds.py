"""Reading is bounded, whatever the input is (issue 13, point 4): a device, an endless standard
input or an include that never ends stops at --max-file-bytes with a message naming the option;
an include path with a NUL byte, a limit naming nothing and bad numeric options end with exit 2
and a message, never a traceback."""

import io
import os
import pickle
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

import dcnet
from dcnet import errors as E
from dcnet.cli import main
from dcnet.language import Options, read_stdin

ROOT = Path(__file__).resolve().parent.parent
CIRCUIT = "cell B1 a gnd emf=12.6V r=5mOhm\nresistor R1 a gnd r=1Ohm\n"


class Endless(io.RawIOBase):
    """A stream that never ends (like `yes` on a pipe); counts what was read from it."""

    def __init__(self, line: bytes = b"# y\n"):
        self.line, self.given = line, 0

    def readable(self):
        return True

    def read(self, n=-1):
        if n is None or n < 0:
            raise AssertionError("an endless stream was read whole")
        self.given += n
        return (self.line * (n // len(self.line) + 1))[:n]


class FakeStdin:
    def __init__(self, buffer):
        self.buffer = buffer


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


# ----------------------------------------------------------------- devices and standard input


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="no /dev/zero")
@pytest.mark.parametrize("device", ["/dev/zero", "/dev/urandom"])
def test_a_device_is_read_only_up_to_the_limit(device, capsys):
    code, out, err = run(capsys, "solve", "--max-file-bytes", "4096", device)
    assert code == 2
    assert "longer than the limit of 4,096 bytes (--max-file-bytes)" in err
    assert "Traceback" not in err


def test_endless_standard_input_stops_at_the_limit(monkeypatch, capsys):
    stream = Endless()
    monkeypatch.setattr(sys, "stdin", FakeStdin(stream))
    code, out, err = run(capsys, "solve", "--max-file-bytes", "10000", "-")
    assert code == 2
    assert "<stdin>: standard input is longer than the limit of 10,000 bytes (--max-file-bytes)" in err
    assert stream.given <= 10_001  # one byte beyond the limit tells it is too long


@pytest.mark.parametrize(
    "argv",
    [
        ["check", "-"],
        ["cycle", "-"],
        ["formula", "--for", "R1.current", "--keep", "R1.r", "-"],
        ["report", "-", "-o", "{tmp}/r.html"],
        ["layouts", "-"],
    ],
)
def test_every_command_reads_standard_input_within_the_limit(argv, monkeypatch, capsys, tmp_path):
    monkeypatch.setattr(sys, "stdin", FakeStdin(Endless()))
    argv = [a.replace("{tmp}", str(tmp_path)) for a in argv]
    code, out, err = run(capsys, argv[0], "--max-file-bytes", "5000", *argv[1:])
    assert code == 2
    assert "--max-file-bytes" in err and "Traceback" not in err


def test_standard_input_within_the_limit_is_read_whole(monkeypatch):
    data = CIRCUIT.encode()
    assert read_stdin(Options(max_file_bytes=len(data)), io.BytesIO(data)) == CIRCUIT
    with pytest.raises(E.LimitError):
        read_stdin(Options(max_file_bytes=len(data) - 1), io.BytesIO(data))


def test_closed_standard_input(monkeypatch, capsys):
    monkeypatch.setattr(sys, "stdin", None)
    code, out, err = run(capsys, "solve", "-")
    assert code == 2 and "standard input is closed" in err


def test_standard_input_that_is_not_utf8_is_refused():
    with pytest.raises(E.InputError, match="not UTF-8"):
        read_stdin(Options(), io.BytesIO(b"cell A a gnd emf=12V r=1Ohm\n# caf\xe9\n"))


def test_a_file_exactly_at_the_limit_is_read(tmp_path, capsys):
    path = tmp_path / "c.dcn"
    path.write_text(CIRCUIT)
    n = len(CIRCUIT.encode())
    assert run(capsys, "solve", "--max-file-bytes", str(n), str(path))[0] == 0
    code, _, err = run(capsys, "solve", "--max-file-bytes", str(n - 1), str(path))
    assert code == 2 and "--max-file-bytes" in err


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="no /dev/zero")
def test_an_include_of_a_device_is_bounded(tmp_path):
    (tmp_path / "zero.dcn").symlink_to("/dev/zero")
    (tmp_path / "c.dcn").write_text(CIRCUIT + 'include "zero.dcn"\n')
    with pytest.raises(E.IncludeError, match="outside the circuit's folder"):
        dcnet.load(tmp_path / "c.dcn")
    # an include is a regular file: a device is refused before a byte of it is read
    with pytest.raises(E.IncludeError) as info:
        dcnet.load(tmp_path / "c.dcn", Options(allow_outside=True, max_file_bytes=1 << 16))
    assert (info.value.line, info.value.column) == (3, 9)
    assert "character device" in info.value.message


@pytest.mark.skipif(shutil.which("yes") is None, reason="no yes(1)")
def test_yes_piped_into_dcnet_ends_with_exit_2():
    """The case as a user meets it: `yes | dcnet solve -`, a real pipe that never ends."""
    yes = subprocess.Popen(["yes"], stdout=subprocess.PIPE)
    try:
        done = subprocess.run(
            [sys.executable, "-m", "dcnet", "solve", "--max-file-bytes", "100000", "-"],
            stdin=yes.stdout, capture_output=True, text=True, timeout=60, cwd=ROOT,
        )
    finally:
        yes.kill()
        yes.wait()
    assert done.returncode == 2
    assert "--max-file-bytes" in done.stderr and "Traceback" not in done.stderr


def test_a_folder_run_refuses_only_the_endless_input(monkeypatch, capsys, tmp_path):
    good = tmp_path / "good.dcn"
    good.write_text(CIRCUIT)
    monkeypatch.setattr(sys, "stdin", FakeStdin(Endless()))
    code, out, err = run(capsys, "solve", "--max-file-bytes", "5000", "-", str(good))
    assert code == 2
    assert "2 files: 1 ok, 0 failed a check, 1 refused" in out


# ----------------------------------------------------------------- include paths, limits


def test_nul_byte_in_an_include_path(tmp_path, capsys):
    path = tmp_path / "c.dcn"
    path.write_text(CIRCUIT + 'include "a\x00b.dcn"\n')
    with pytest.raises(E.IncludeError) as info:
        dcnet.load(path)
    err = info.value
    assert (err.line, err.column) == (3, 9)
    assert pickle.loads(pickle.dumps(err)).render() == err.render()
    code, out, errtext = run(capsys, "solve", str(path))
    assert code == 2 and "c.dcn:3:9: the include path holds the control character '\\x00'" in errtext
    assert "Traceback" not in errtext


def test_an_include_that_cannot_be_followed(tmp_path):
    (tmp_path / "loop1").symlink_to("loop2")
    (tmp_path / "loop2").symlink_to("loop1")
    (tmp_path / "c.dcn").write_text(CIRCUIT + 'include "loop1"\n')
    with pytest.raises(E.IncludeError):
        dcnet.load(tmp_path / "c.dcn")
    (tmp_path / "d.dcn").write_text(CIRCUIT + f'include "{"a" * 5000}.dcn"\n')
    with pytest.raises(E.InputError):
        dcnet.load(tmp_path / "d.dcn")


def test_unknown_names_in_limits_and_in_show_are_input_errors(tmp_path, capsys):
    """A limit naming no element used to end in a KeyError traceback from the checks; --show of an
    unknown element raised QuantityError, which was no DcnetError."""
    from dcnet.analysis.solution import QuantityError

    path = tmp_path / "c.dcn"
    path.write_text(CIRCUIT + "limit current max=5A of=NOPE\n")
    code, out, err = run(capsys, "check", str(path))
    assert code == 2 and "c.dcn:3:25: limit names 'NOPE'" in err and "Traceback" not in err
    path.write_text(CIRCUIT)
    sol = dcnet.load(path).solve()
    with pytest.raises(E.DcnetError) as info:
        sol.current("NOPE")
    assert isinstance(info.value, QuantityError) and isinstance(info.value, KeyError)
    assert pickle.loads(pickle.dumps(info.value)).message == info.value.message


def test_a_folder_run_refuses_only_the_file_with_a_bad_limit(tmp_path, capsys):
    (tmp_path / "a.dcn").write_text(CIRCUIT)
    (tmp_path / "b.dcn").write_text(CIRCUIT + "limit current max=5A of=NOPE\n")
    (tmp_path / "c.dcn").write_text(CIRCUIT + 'include "x\x00.dcn"\n')
    code, out, err = run(capsys, "solve", str(tmp_path))
    assert code == 2
    assert "3 files: 1 ok, 0 failed a check, 2 refused" in out


# ----------------------------------------------------------------- numeric options

BAD_OPTIONS = [
    ("spread", ["--seed", "-1"], "--seed"),
    ("spread", ["--seed", "x"], "--seed"),
    ("spread", ["--seed", "\uff11"], "--seed"),
    ("spread", ["--samples", "0"], "--samples"),
    ("spread", ["--samples", "-3"], "--samples"),
    ("spread", ["--samples", "100000001"], "--samples"),
    ("solve", ["--max-file-bytes", "0"], "--max-file-bytes"),
    ("solve", ["--max-file-bytes", "-1"], "--max-file-bytes"),
    ("solve", ["--max-elements", "0"], "--max-elements"),
    ("solve", ["--max-include-depth", "-1"], "--max-include-depth"),
    ("solve", ["--max-expression-depth", "0"], "--max-expression-depth"),
    ("solve", ["--max-block-depth", "-2"], "--max-block-depth"),
    ("solve", ["--max-elements", "1e6"], "--max-elements"),
    ("formula", ["--for", "R1.current", "--time-budget", "-1"], "--time-budget"),
    ("formula", ["--for", "R1.current", "--time-budget", "nan"], "--time-budget"),
    ("formula", ["--for", "R1.current", "--time-budget", "1e300"], "--time-budget"),
]


@pytest.mark.parametrize("command, opts, name", BAD_OPTIONS, ids=[" ".join(o) for _, o, _ in BAD_OPTIONS])
def test_bad_numeric_options_are_argparse_errors(command, opts, name, tmp_path, capsys):
    path = tmp_path / "c.dcn"
    path.write_text(CIRCUIT)
    with pytest.raises(SystemExit) as info:
        main([command, *opts, str(path)])
    out, err = capsys.readouterr()
    assert info.value.code == 2
    assert f"argument {name}: " in err and "Traceback" not in err


@pytest.mark.parametrize(
    "command, opts, phrase",
    [
        ("cycle", ["--step=0s"], "not a positive time"),
        ("cycle", ["--step=-1s"], "not a positive time"),
        ("cycle", ["--step=1e-320s"], "too small"),
        ("cycle", ["--step=nan"], "unknown name 'nan'"),
        ("spread", ["--samples", "10", "--percentiles", "nan"], "between 0 and 100"),
    ],
)
def test_bad_values_of_options_read_by_the_language(command, opts, phrase, tmp_path, capsys):
    path = ROOT / "circuits" / ("cabin-cycle.dcn" if command == "cycle" else "shed-bank-spread.dcn")
    code, out, err = run(capsys, command, *opts, str(path))
    assert code == 2
    assert phrase in err and "Traceback" not in err


def test_a_seed_of_zero_and_a_large_seed_are_taken(capsys):
    path = str(ROOT / "circuits" / "shed-bank-spread.dcn")
    for seed in ("0", str(2**100)):
        code, out, err = run(capsys, "spread", "--samples", "20", "--seed", seed, path)
        assert code in (0, 1), err
        assert f"seed {seed}" in out
