"""The committed corpus of malformed circuit files: each must produce exactly its recorded
error (class, line, column, message), through the API and through the command line (exit 2,
no traceback). Regenerate with tests/corpus/make_corpus.py and review the diff."""

import csv
from pathlib import Path

import pytest

import dcnet
from dcnet.cli import main
from dcnet.errors import DcnetError

HERE = Path(__file__).resolve().parent
with open(HERE / "expected.tsv", newline="") as fh:
    ROWS = list(csv.DictReader(fh, delimiter="\t"))


def test_corpus_is_large_enough():
    assert len(ROWS) >= 100
    assert {p.name for p in (HERE / "malformed").glob("*.dcn")} == {r["file"] for r in ROWS}


@pytest.mark.parametrize("row", ROWS, ids=[r["file"] for r in ROWS])
def test_each_file_gives_its_message(row):
    path = HERE / "malformed" / row["file"]
    with pytest.raises(DcnetError) as info:
        dcnet.load(path).solve()
    err = info.value
    assert type(err).__name__ == row["error"]
    assert (err.line or 0, err.column or 0) == (int(row["line"]), int(row["column"]))
    assert err.message.replace(str(path.parent) + "/", "") == row["message"]


def test_command_line_refuses_the_whole_corpus(capsys):
    files = [str(HERE / "malformed" / r["file"]) for r in ROWS]
    code = main(["solve", *files])
    out, err = capsys.readouterr()
    assert code == 2
    assert f"{len(files)} files: 0 ok, 0 failed a check, {len(files)} refused" in out
    assert "Traceback" not in err
    for r in ROWS:
        if int(r["line"]):
            assert f"{r['file']}:{r['line']}:{r['column']}: " in err
