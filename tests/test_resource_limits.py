"""Limits that hold before the work (issue 13, point 9): each refusal comes up front, with the
figure and the option that raises it. Up-front is checked by making the expensive step fail if
it is reached (no timing)."""

from __future__ import annotations

import os

import pytest

import dcnet
from dcnet.errors import DcnetError, LimitError
from dcnet.language import Options


def test_include_fan_out_is_refused_after_a_bounded_number_of_files(tmp_path):
    (tmp_path / "top.dcn").write_text("cell A p gnd emf=12V r=0.01Ohm\nresistor R p gnd r=1Ohm\n" + 'include "l1.dcn"\n' * 10)
    for i in range(1, 8):
        (tmp_path / f"l{i}.dcn").write_text("# level\n" + f'include "l{i + 1}.dcn"\n' * 10)
    (tmp_path / "l8.dcn").write_text("# leaf\n")
    with pytest.raises(LimitError) as exc:
        dcnet.load(tmp_path / "top.dcn", Options(max_includes=50))
    assert "above the limit of 50" in exc.value.message and "--max-includes" in exc.value.hint
    assert exc.value.span.line >= 1


def test_an_include_of_a_named_pipe_is_refused_without_waiting(tmp_path):
    os.mkfifo(tmp_path / "pipe.dcn")
    (tmp_path / "top.dcn").write_text('cell A p gnd emf=12V r=0.01Ohm\nresistor R p gnd r=1Ohm\ninclude "pipe.dcn"\n')
    with pytest.raises(DcnetError) as exc:
        dcnet.load(tmp_path / "top.dcn")
    assert "named pipe" in exc.value.message
    assert exc.value.span.line == 3


def test_blank_lines_keep_line_numbers():
    text = "cell A p gnd emf=12V r=0.01Ohm\n" + "\n   \n# c\n" * 1000 + "resistor R p gnd r=1Ohm x=3\n"
    with pytest.raises(DcnetError) as exc:
        dcnet.parse(text)
    assert exc.value.span.line == 3002
    assert exc.value.source_line == "resistor R p gnd r=1Ohm x=3"


def test_a_bank_beyond_the_element_limit_is_refused_before_expanding(monkeypatch):
    import dcnet.language.elaborate as el

    def boom(*a, **k):
        raise AssertionError("expanded")

    monkeypatch.setattr(el, "add_element", boom)
    text = "part c cell emf=3.3V r=2mOhm\nbank B p gnd series=1000 parallel=1000 cell=c strap=0.1mOhm lead=1mOhm\n"
    with pytest.raises(LimitError) as exc:
        dcnet.parse(text)
    # count: 1,000,000 cells + 999,000 straps + 2,000 leads (closed form of the shorthand)
    assert "2,001,000 elements" in exc.value.message and "--max-elements" in exc.value.hint


def test_the_default_element_limit_refuses_a_bank_of_minutes_and_gigabytes(monkeypatch):
    # a straps-only 1000 x 1000 bank (1,000,000 cells + 999,000 straps) passed the old default of
    # 2,000,000 and would have run for minutes in some 9 GB (a 400 x 400 one, 319,600 elements,
    # took 35 s and 1.4 GB): the default now stops it before anything is expanded
    import dcnet.language.elaborate as el

    monkeypatch.setattr(el, "add_element", lambda *a, **k: (_ for _ in ()).throw(AssertionError("expanded")))
    text = "part c cell emf=3.3V r=2mOhm\nbank B p gnd series=1000 parallel=1000 cell=c strap=0.1mOhm\n"
    with pytest.raises(LimitError) as exc:
        dcnet.parse(text)
    assert "1,999,000 elements" in exc.value.message and "500,000" in exc.value.message
    monkeypatch.undo()
    ok = dcnet.parse("part c cell emf=3.3V r=2mOhm\nbank B p gnd series=20 parallel=20 cell=c strap=0.1mOhm\nground gnd\n")
    assert len(ok.elements) == 20 * 20 + 19 * 20


def test_a_block_fan_out_is_refused_at_its_use_line(monkeypatch):
    lines = ["cell A p gnd emf=12V r=0.01Ohm", "block L0 (x, y)", "resistor R x y r=1Ohm", "end"]
    for i in range(1, 8):
        lines += [f"block L{i} (x, y)"] + [f"use U{j} L{i - 1} (x, y)" for j in range(10)] + ["end"]
    lines.append("use TOP L7 (p, gnd)")
    with pytest.raises(LimitError) as exc:
        dcnet.parse("\n".join(lines) + "\n")
    assert "10,000,000 elements" in exc.value.message  # 10^7 resistors
    assert exc.value.span.line == len(lines)


def test_a_sweep_grid_and_a_spread_beyond_the_sample_limit_are_refused(capsys):
    from dcnet.cli import main

    assert main(["sweep", "circuits/shed-bank-spread.dcn", "--vary", "r_mono=1mOhm..10mOhm:10000", "--vary", "emf_mono=12V..13V:10000", "--show", "r_mono"]) == 2
    err = capsys.readouterr().err
    assert "100,000,000" in err and "--max-samples" in err  # 10,000 x 10,000
    assert main(["spread", "circuits/shed-bank-spread.dcn", "--samples", "50000000"]) == 2
    assert "--max-samples" in capsys.readouterr().err


def test_a_cycle_with_a_tiny_step_is_refused_before_any_solve(monkeypatch):
    import dcnet.analysis.cycle as cyc

    monkeypatch.setattr(cyc, "branch_table", lambda *a: (_ for _ in ()).throw(AssertionError("solved")), raising=False)
    net = dcnet.load("circuits/cabin-cycle.dcn")
    with pytest.raises(LimitError) as exc:
        cyc.run(net, step=1e-3)
    assert "21,600,000 steps" in exc.value.message  # 6 h / 1 ms
    assert "--max-steps" in exc.value.hint and exc.value.span is not None


def test_a_condition_phase_without_max_is_bounded_by_the_default_limit():
    from dcnet.analysis.cycle import DEFAULT_MAX, Phase, planned_steps

    ph = Phase.from_values("charge", {"soc_above": 0.95})
    with pytest.raises(LimitError):
        planned_steps([ph], 1.0, max_steps=int(DEFAULT_MAX) - 1)
    assert planned_steps([ph], 1.0, max_steps=int(DEFAULT_MAX)) == int(DEFAULT_MAX)  # 100 h of 1 s steps
