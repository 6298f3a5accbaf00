"""Fuzzing: whatever the input, dcnet either solves (and the solution verifies) or raises
one of its own errors, with a location or named culprits. Never another exception.

The example budget is small in CI; ``DCNET_FUZZ_EXAMPLES`` raises it for long runs
(see bench/fuzz_run.py for the hand-run campaign and its figures).
"""

import os
import pickle

from hypothesis import HealthCheck, given, settings

import dcnet
from dcnet.errors import DcnetError, InputError, TopologyError

from .strategies import any_input, mutated_file, token_soup, valid_netlist

BUDGET = int(os.environ.get("DCNET_FUZZ_EXAMPLES", "200"))
SETTINGS = settings(max_examples=BUDGET, deadline=None, suppress_health_check=list(HealthCheck))


def check_one(text: str) -> str:
    """Solve or refuse properly; returns the outcome class for statistics."""
    try:
        sol = dcnet.parse(text, "fuzz.dcn").solve()
    except InputError as err:
        assert err.span is not None and err.span.file == "fuzz.dcn", err.render()
        assert "Traceback" not in err.render()
        pickle.loads(pickle.dumps(err))
        return type(err).__name__
    except TopologyError as err:
        assert err.culprits or err.node, err.render()
        return "TopologyError"
    except DcnetError as err:
        err.render()
        return type(err).__name__
    bal = sol.balance
    assert bal["kcl_relative"] <= 1e-6 and bal["power_relative"] <= 1e-6
    sol.to_dict()
    return "solved"


@SETTINGS
@given(token_soup)
def test_token_soup(text):
    check_one(text)


@SETTINGS
@given(mutated_file())
def test_mutated_demo_files(text):
    check_one(text)


@SETTINGS
@given(valid_netlist())
def test_random_valid_netlists(text):
    check_one(text)


@SETTINGS
@given(any_input)
def test_cli_never_shows_a_traceback(text):
    import contextlib
    import io

    from dcnet.cli import main

    err = io.StringIO()
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(err):
        import sys

        old = sys.stdin
        sys.stdin = io.StringIO(text)
        try:
            code = main(["solve", "-"])
        finally:
            sys.stdin = old
    assert code in (0, 1, 2)
    assert "Traceback" not in err.getvalue()
    if code == 2:
        assert "<stdin>" in err.getvalue()
