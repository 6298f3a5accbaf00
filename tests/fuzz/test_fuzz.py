"""Fuzzing: whatever the input, dcnet either solves (and the solution verifies) or raises
one of its own errors, with a location or named culprits. Never another exception.

The example budget is small in CI; ``DCNET_FUZZ_EXAMPLES`` raises it for long runs
(see bench/fuzz_run.py for the hand-run campaign and its figures).
"""

import os
import pickle
import warnings

from hypothesis import HealthCheck, given, settings

import dcnet
from dcnet.errors import DcnetError, InputError, TopologyError

from .oracle import bound_violations, kcl_violations, passivity_violations
from .strategies import any_input, extreme_netlist, hostile_demo, hostile_seed, mutated_file, token_soup, valid_netlist

BUDGET = int(os.environ.get("DCNET_FUZZ_EXAMPLES", "200"))
SETTINGS = settings(max_examples=BUDGET, deadline=None, suppress_health_check=list(HealthCheck))


def check_one(text: str) -> str:
    """Solve or refuse properly; returns the outcome class for statistics.

    A refusal must be one of dcnet's own errors (with a location or culprits, pickling
    cleanly). A solved answer must verify, obey Kirchhoff's current law at every node judged
    against the currents meeting there, and keep every potential within the physical bound
    written in the test (tests/fuzz/oracle.py). No numpy RuntimeWarning (overflow, invalid
    value, division by zero) may escape on the way, refused or solved."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        outcome, sol = _solve(text)
    numpy_warnings = [w for w in caught if issubclass(w.category, RuntimeWarning)]
    assert not numpy_warnings, f"RuntimeWarning: {numpy_warnings[0].message} ({numpy_warnings[0].filename}:{numpy_warnings[0].lineno})"
    if sol is not None:
        net = sol.netlist
        kcl = kcl_violations(net, sol.potentials, sol.i)
        assert not kcl, "Kirchhoff: " + "; ".join(kcl[:3])
        active = passivity_violations(net, sol.v, sol.i)
        assert not active, "passivity: " + "; ".join(active[:3])
        far = bound_violations(net, sol.potentials)
        assert not far, "bound: " + "; ".join(far[:3])
    return outcome


def _solve(text: str):
    try:
        sol = dcnet.parse(text, "fuzz.dcn").solve()
    except InputError as err:
        assert err.span is not None and err.span.file == "fuzz.dcn", err.render()
        assert "Traceback" not in err.render()
        pickle.loads(pickle.dumps(err))
        return type(err).__name__, None
    except TopologyError as err:
        assert err.culprits or err.node, err.render()
        return "TopologyError", None
    except DcnetError as err:
        err.render()
        pickle.loads(pickle.dumps(err))
        return type(err).__name__, None
    bal = sol.balance
    assert bal["kcl_relative"] <= 1e-6 and bal["power_relative"] <= 1e-6
    sol.to_dict()
    return "solved", sol


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
