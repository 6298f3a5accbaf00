"""Parse/print round trips (hypothesis): printing an elaborated netlist and parsing it again
gives the same elements, the same values (to round-off) and the same solution."""

import math

from hypothesis import given, settings
from hypothesis import strategies as st

import dcnet
from dcnet.language import to_text

node = st.sampled_from(["gnd", "bus+", "bus-", "a1", "s1.top", "n_2", "x-", "7"])
pos = st.floats(min_value=1e-4, max_value=1e4, allow_nan=False, allow_infinity=False)
# the language refuses non-zero magnitudes below 1e-100 (underflow) and loads that feed the network
signed = st.floats(min_value=-1e3, max_value=1e3, allow_nan=False, allow_infinity=False).filter(lambda x: x == 0 or abs(x) >= 1e-100)
drawn = st.floats(min_value=0, max_value=1e3, allow_nan=False, allow_infinity=False).filter(lambda x: x == 0 or x >= 1e-100)


@st.composite
def element_line(draw, i):
    kind = draw(st.sampled_from(["resistor", "cell", "source", "supply", "cable", "fuse", "switch", "link", "load"]))
    a, b = draw(node), draw(node)
    name = f"E{i}"
    if kind == "resistor":
        props = f"r={draw(pos)!r}Ohm"
    elif kind == "cell":
        props = f"emf={draw(signed)!r}V r={draw(pos)!r}mOhm capacity={draw(pos)!r}Ah chemistry={draw(st.sampled_from(['lead-acid', 'lifepo4', 'nmc']))}"
    elif kind == "source":
        props = f"emf={draw(signed)!r}V" + (f" r={draw(pos)!r}Ohm" if draw(st.booleans()) else "")
    elif kind == "supply":
        props = f"current={draw(signed)!r}A"
    elif kind == "cable":
        size = draw(st.one_of(st.builds(lambda x: f"size={x!r}mm2", pos), st.sampled_from(["gauge=10", "gauge=4/0", "gauge=1/0", "gauge=14"])))
        props = f"length={draw(pos)!r}m {size} metal={draw(st.sampled_from(['copper', 'aluminium']))} temp={draw(st.floats(-40, 120).filter(lambda x: x == 0 or abs(x) >= 1e-100))!r}degC"
        if draw(st.booleans()):
            props = f"length={draw(pos)!r}m r={draw(pos)!r}mOhm/m"
    elif kind == "fuse":
        props = f"rating={draw(pos)!r}A" + (f" r={draw(pos)!r}mOhm" if draw(st.booleans()) else "")
    elif kind == "switch":
        props = f"state={draw(st.sampled_from(['open', 'closed']))}" + (f" r={draw(pos)!r}mOhm" if draw(st.booleans()) else "")
    elif kind == "link":
        props = f"r={draw(pos)!r}mOhm" if draw(st.booleans()) else ""
    else:
        props = draw(st.sampled_from([f"r={draw(pos)!r}Ohm", f"current={draw(drawn)!r}A"]))
    return f"{kind} {name} {a} {b} {props}"


@st.composite
def circuit(draw):
    n = draw(st.integers(1, 12))
    lines = [draw(element_line(i)) for i in range(n)]
    if draw(st.booleans()):
        lines.append("ground gnd")
        lines.insert(0, "resistor R_ref gnd bus+ r=1Ohm")
    return "\n".join(lines) + "\n"


def _same(v1, v2):
    if isinstance(v1, float):
        return math.isclose(v1, v2, rel_tol=1e-12, abs_tol=1e-300)
    return v1 == v2


@settings(max_examples=150, deadline=None)
@given(circuit())
def test_print_then_parse_gives_the_same_netlist(text):
    net = dcnet.parse(text)
    again = dcnet.parse(to_text(net))
    assert [e.name for e in again.elements] == [e.name for e in net.elements]
    assert again.ground == net.ground
    for e1, e2 in zip(net.elements, again.elements):
        assert e1.kind == e2.kind and e1.nodes == e2.nodes
        assert set(e1.values) == set(e2.values)
        for k in e1.values:
            assert _same(e1.values[k], e2.values[k]), (e1.name, k, e1.values[k], e2.values[k])
    # printing is stable: a second round gives the same text
    assert to_text(again) == to_text(net)


def test_demo_circuits_round_trip_to_the_same_solution():
    from pathlib import Path

    for path in sorted((Path(__file__).resolve().parents[2] / "circuits").glob("*.dcn")):
        net = dcnet.load(path)
        sol1 = net.solve()
        sol2 = dcnet.parse(to_text(net)).solve()
        for name in sol1.branches.names:
            assert math.isclose(sol1.current(name), sol2.current(name), rel_tol=1e-9, abs_tol=1e-12)
