"""Fuzzing: whatever the input, dcnet either solves (and the solution verifies) or raises
one of its own errors, with a location or named culprits. Never another exception.

The example budget is small in CI; ``DCNET_FUZZ_EXAMPLES`` raises it for long runs
(see bench/fuzz_run.py for the hand-run campaign and its figures).
"""

import contextlib
import os
import pickle
import warnings

import pytest
from hypothesis import HealthCheck, Phase, given, settings
from hypothesis import strategies as st

import dcnet
from dcnet.errors import DcnetError, InputError, TopologyError

from .oracle import bound_violations, kcl_violations, passivity_violations
from .strategies import BIG_SEED, FAULT_SEED_DIR, any_input, extreme_netlist, hostile_demo, hostile_seed, mutated_file, token_soup, valid_netlist

BUDGET = int(os.environ.get("DCNET_FUZZ_EXAMPLES", "200"))
SETTINGS = settings(max_examples=BUDGET, deadline=None, suppress_health_check=list(HealthCheck))
#: the hostile families do not shrink: a failure is reported as drawn (shrinking a hostile input
#: can take minutes); bench/fuzz_run.py keeps the shortest input of each fault class instead
HOSTILE = settings(SETTINGS, phases=[Phase.explicit, Phase.reuse, Phase.generate])


def check_one(text: str) -> str:
    """Solve or refuse properly; returns the outcome class for statistics.

    A refusal must be one of dcnet's own errors (with a location or culprits, pickling
    cleanly). A solved answer must verify, obey Kirchhoff's current law at every node judged
    against the currents meeting there, and keep every potential within the physical bound
    written in the test (tests/fuzz/oracle.py). No numpy RuntimeWarning (overflow, invalid
    value, division by zero) may escape on the way, refused or solved."""
    with warnings.catch_warnings(record=True) as caught, _memory_cap():
        warnings.simplefilter("always")
        outcome, sol = _solve(text)
    numpy_warnings = [w for w in caught if issubclass(w.category, RuntimeWarning)]
    assert not numpy_warnings, f"RuntimeWarning: {numpy_warnings[0].message} ({numpy_warnings[0].filename}:{numpy_warnings[0].lineno})"
    if sol is not None:
        net = sol.netlist
        far = bound_violations(net, sol.potentials)
        assert not far, "bound: " + "; ".join(far[:3])
        kcl = kcl_violations(net, sol.potentials, sol.i)
        assert not kcl, "Kirchhoff: " + "; ".join(kcl[:3])
        active = passivity_violations(net, sol.v, sol.i)
        assert not active, "passivity: " + "; ".join(active[:3])
    return outcome


#: address space a single fuzz input may add to the process (a hostile input once built a
#: string of 5e11 numbers: without a cap it would take the machine's memory before failing)
MEMORY_CAP = 1024 * 1024 * 1024


@contextlib.contextmanager
def _memory_cap():
    """Lower the soft address-space limit to the current size plus MEMORY_CAP while one input
    runs (Linux; elsewhere nothing), and restore it after: a runaway input ends in MemoryError,
    a fault of its own, instead of swapping the machine."""
    try:
        import resource

        with open("/proc/self/status") as f:
            size = next(int(line.split()[1]) * 1024 for line in f if line.startswith("VmSize:"))
        old = resource.getrlimit(resource.RLIMIT_AS)
        cap = size + MEMORY_CAP
        if old[0] != resource.RLIM_INFINITY and old[0] <= cap:
            yield
            return
        resource.setrlimit(resource.RLIMIT_AS, (cap, old[1]))
    except (ImportError, OSError, StopIteration, ValueError):
        yield
        return
    try:
        yield
    finally:
        resource.setrlimit(resource.RLIMIT_AS, old)


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
    _cli_without_traceback(text)


@HOSTILE
@given(st.one_of(hostile_demo, hostile_seed))
def test_cli_never_shows_a_traceback_on_hostile_input(text):
    _cli_without_traceback(text)


def _cli_without_traceback(text):
    import io
    import sys

    from dcnet.cli import main

    err = io.StringIO()
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(err), _memory_cap(), warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        old = sys.stdin
        sys.stdin = io.StringIO(text)
        try:
            code = main(["solve", "-"])
        finally:
            sys.stdin = old
    assert code in (0, 1, 2)
    assert "Traceback" not in err.getvalue()
    assert "internal fault" not in err.getvalue(), err.getvalue()  # the CLI's catch-all hides no fault from the fuzzer
    numpy_warnings = [w for w in caught if issubclass(w.category, RuntimeWarning)]
    assert not numpy_warnings, f"RuntimeWarning: {numpy_warnings[0].message} ({numpy_warnings[0].filename}:{numpy_warnings[0].lineno})"
    if code == 2:
        assert "<stdin>" in err.getvalue()


# --------------------------------------------------------------------------------------------
# The fault seeds (bench/fuzz_seeds/faults/, our own scenarios, one per fault family of issue
# 13): each must pass the oracle, and those whose right outcome is known must have it.
# "refused": values or statements that make no physical sense, an error of dcnet's own;
# "solved": valid circuits; "oracle": either, as long as the answer is physical.

SEED_EXPECTATIONS = {
    "cable-minus-250.dcn": ("refused", None),
    "fullwidth-digits.dcn": ("refused", None),
    "ohm-sign.dcn": ("refused with a hint naming Ohm", None),
    "negative-load-current.dcn": ("refused", None),
    "subnormal-ohm.dcn": ("refused", None),
    "limit-among-nothing.dcn": ("refused", None),
    "limit-among-unknown.dcn": ("refused", None),
    "limit-among-duplicate.dcn": ("refused", None),
    "nul-include.dcn": ("refused", None),
    "limit-unknown-element.dcn": ("refused", None),
    "load-at-power-limit.dcn": ("refused with the power-limit message", None),
    "isolator-inverter-solar.dcn": ("solved", None),
    "ideal-source-junction-diode.dcn": ("oracle", None),
    "nano-giga-ohm.dcn": ("solved", None),
    "many-cp-loads.dcn": ("solved", None),
    "many-diode-branches.dcn": ("solved", None),
    "many-diode-resistor-branches.dcn": ("solved", None),
    "zeroed-cable-current.dcn": ("solved", None),
    "fuse-current-zeroed.dcn": ("solved, checks fail", None),
    "newton-subnormal-ideality.dcn": ("refused", None),
    "short-load-zeroed.dcn": ("oracle", None),
    "diode-absolute-zero.dcn": ("refused", None),
}


def _seed_params():
    out = []
    for path in sorted(FAULT_SEED_DIR.glob("*.dcn")):
        if path.stat().st_size >= BIG_SEED:
            continue  # thousands of lines, seconds each: bench/fuzz_run.py's big-seeds family
        expect, mark = SEED_EXPECTATIONS.get(path.name, ("oracle", None))
        out.append(pytest.param(path, expect, id=path.name, marks=[mark] if mark else []))
    return out


@pytest.mark.parametrize(("path", "expect"), _seed_params())
def test_fault_seed(path, expect):
    text = path.read_text(encoding="utf-8", errors="surrogateescape")
    outcome = check_one(text)
    if expect.startswith("refused"):
        assert outcome != "solved", f"{path.name} solved; it should be refused"
    if expect.startswith("solved"):
        assert outcome == "solved", f"{path.name}: {outcome}"
    if expect == "solved, checks fail":  # a fuse over its rating (closed form: I = E / (R + r_cell))
        assert dcnet.parse(text, "fuzz.dcn").solve().failed, f"{path.name}: every check passed"
    if "hint naming Ohm" in expect:
        with pytest.raises(DcnetError) as err:
            dcnet.parse(text, "fuzz.dcn")
        assert "Ohm" in (err.value.hint or ""), err.value.render()
    if "power-limit" in expect:
        with pytest.raises(DcnetError) as err:
            dcnet.parse(text, "fuzz.dcn").solve()
        assert "did not settle" not in str(err.value) and "at most" in str(err.value) and "limit" in str(err.value), err.value.render()


@HOSTILE
@given(hostile_demo)
def test_hostile_mutations_of_the_demos(text):
    check_one(text)


@HOSTILE
@given(hostile_seed)
def test_hostile_mutations_of_the_fault_seeds(text):
    check_one(text)


@HOSTILE
@given(extreme_netlist())
def test_netlists_over_eighteen_decades(text):
    check_one(text)
