"""Property tests: the verdicts of circuits nobody wrote by hand, against references computed here.

Circuits are drawn at random (hypothesis) but kept physical: EMFs 1-60 V per cell element,
resistances 0.1 mOhm-10 Ohm (log-uniform), counts 1-5, ageing factors 1-3, cell EMFs of a bank
within 10 % of each other, constant-current loads drawing a fraction of what their terminals
could deliver. Every number is compared with a reference computed in this file:

* the small nodal solver of tests/checks/reference.py (Kirchhoff's laws and Ohm's law; ideal
  links and bolted faults are merged nodes, and the currents of ideal links follow from
  Kirchhoff's current law by peeling the leaves of the forest they form: ``ref_state``);
* closed forms: Millman's theorem for strings in parallel, the Norton sum sum(E_k/R_k) for a
  bolted fault across them, Ohm's law around the loop of two strings at rest;
* the conductor resistance R = rho20 (1 + alpha (T - 20 degC)) L / A with copper 0.017241 and
  aluminium 0.028264 Ohm mm2/m, alpha 0.00393 and 0.00403 /K (IEC 60028 for copper, from memory;
  aluminium at 61 % IACS, from memory) and AWG diameters d = 0.127 mm x 92^((36 - n)/39)
  (ASTM B258 rule, from memory);
* per-cell voltage windows of the chemistries (from memory, the values dcnet/data/chemistries.tsv
  gives).

The circuits are never run through dcnet to make a reference: what dcnet says is only ever the
thing checked.
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import os
import re
import tempfile
from collections import defaultdict
from dataclasses import dataclass, field

import pytest
from hypothesis import HealthCheck, assume, example, given, settings
from hypothesis import strategies as st

import dcnet
from dcnet.cli import main

from .reference import solve as ref_solve

SETTINGS = dict(deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


# ================================================================== the reference
@dataclass
class El:
    """One element as the test knows it: the physics (for the reference) and its line (for dcnet)."""

    kind: str  # cell, resistor, cable, link, fuse, load
    name: str
    a: str
    b: str
    emf: float = 0.0
    r: float | None = None  # None: an ideal conductor (link or fuse without r)
    current: float | None = None  # a constant-current load
    props: str = ""  # as written on the element's line

    @property
    def conductor(self) -> bool:
        return self.kind in ("resistor", "cable", "link", "fuse")

    def line(self) -> str:
        return f"{self.kind} {self.name} {self.a} {self.b} {self.props}".rstrip()


def nodes_of(els):
    return sorted({e.a for e in els} | {e.b for e in els})


def ref_state(els, ground, fault=None, fault_state=False):
    """Node potentials and every element's current (first node to second), by reference.py.

    Ideal conductors are merged nodes; ``fault`` = (t, r) is a bolted fault, a zero-ohm link
    from t to r whose current (t to r) is returned under the name "fault". In the fault state
    constant-current loads draw nothing (what dcnet/checks/fault.py promises). Kirchhoff's laws.
    """
    parent = {n: n for n in nodes_of(els)}

    def find(x):
        while parent[x] != x:
            x = parent[x]
        return x

    ideal = [(e.name, e.a, e.b) for e in els if e.conductor and e.r is None]
    for _, a, b in ideal:
        ra, rb = find(a), find(b)
        if ra != rb:
            parent[rb] = ra
    branches, owners = [], []
    for e in els:
        if e.conductor and e.r is None:
            continue
        if e.kind == "load" and e.current is not None:
            if fault_state:
                continue
            br = ("i", find(e.a), find(e.b), e.current)
        elif e.kind == "cell":
            br = ("emf", find(e.a), find(e.b), e.emf, e.r)
        else:
            br = ("r", find(e.a), find(e.b), e.r)
        branches.append(br)
        owners.append(e)
    merge = [(find(fault[0]), find(fault[1]))] if fault else []
    pot_rep, cur, _ = ref_solve(branches, find(ground), merge=merge)
    pot = {n: pot_rep[find(n)] for n in parent if find(n) in pot_rep}
    out = {e.name: i for e, i in zip(owners, cur)}
    # ideal links (and the fault): Kirchhoff's current law, leaf by leaf of their forest
    links = ideal + ([("fault", fault[0], fault[1])] if fault else [])
    inj = defaultdict(float)  # current into each node from the solved branches
    for e, i in zip(owners, cur):
        inj[e.a] -= i
        inj[e.b] += i
    degree = defaultdict(int)
    for _, a, b in links:
        degree[a] += 1
        degree[b] += 1
    alive = list(range(len(links)))
    while alive:
        rest = []
        for k in alive:
            name, a, b = links[k]
            if degree[a] == 1:
                i = inj[a]
                inj[b] += i
                inj[a] = 0.0
            elif degree[b] == 1:
                i = -inj[b]
                inj[a] += inj[b]
                inj[b] = 0.0
            else:
                rest.append(k)
                continue
            out[name] = i
            degree[a] -= 1
            degree[b] -= 1
        assert len(rest) < len(alive), "a loop of ideal conductors: the drawn circuit is wrong"
        alive = rest
    return pot, out


def conductor_groups(els):
    """Node -> conductor group (nodes joined by cables, links, fuses, resistors)."""
    parent = {n: n for n in nodes_of(els)}

    def find(x):
        while parent[x] != x:
            x = parent[x]
        return x

    for e in els:
        if e.conductor:
            ra, rb = find(e.a), find(e.b)
            if ra != rb:
                parent[rb] = ra
    return {n: find(n) for n in parent}


def worst_faults(els, ground, fuse):
    """|current through ``fuse``| for every bolted fault from either of its ends to every node
    of another conductor group (reference), as {(end, return): amperes}."""
    group = conductor_groups(els)
    mine = group[fuse.a]
    out = {}
    for t in dict.fromkeys((fuse.a, fuse.b)):
        for r in nodes_of(els):
            if group[r] == mine:
                continue
            _, cur = ref_state(els, ground, fault=(t, r), fault_state=True)
            out[(t, r)] = abs(cur[fuse.name])
    return out


# ================================================================== drawing values
def sig(x: float) -> float:
    return float(f"{x:.6g}")


def q(x: float, unit: str) -> str:
    return f"{x!r}{unit}"


OHMS = st.floats(-4.0, 1.0).map(lambda e: sig(10.0**e))  # 0.1 mOhm .. 10 Ohm, log-uniform
VOLTS = st.floats(1.0, 60.0).map(sig)
FACTOR = st.floats(1.0, 3.0).map(sig)
SHIFT = st.floats(-0.1, 0.1)  # EMF of a cell of a bank within 10 % of the part's
AMPS = st.floats(1.0, 4.0).map(lambda e: sig(10.0**e))  # ratings and interrupt ratings 10 A .. 10 kA


def conductor(draw, name, a, b, r, kinds=("resistor", "link", "cable")):
    """A conductor of resistance r as a resistor, a link or a cable with a resistance per length."""
    kind = draw(st.sampled_from(kinds))
    if kind == "cable":
        length = draw(st.sampled_from([0.5, 1.0, 2.0, 2.5, 4.0, 10.0]))
        per = sig(r / length)
        return El("cable", name, a, b, r=per * length, props=f"length={q(length, 'm')} r={q(per, 'Ohm')}/m")
    return El(kind, name, a, b, r=r, props=f"r={q(r, 'Ohm')}")


# ================================================================== banks
@dataclass
class BankCase:
    style: str  # "bank" (the shorthand) or "explicit" (element by element)
    S: int
    P: int
    text: str
    els: list
    pos: str
    neg: str
    bank: str | None  # the bank's name (shorthand)
    has_bus: bool
    strings: list  # (E_k, R_k) per string, summed from the drawn values (closed forms)
    last_cells: list  # the last cell of each string (the imbalance's members)
    load: El | None
    feed_r: float  # resistance between the bank terminals and the load (main fuse, cable)
    imbalance_limit: float  # percent
    circulating_limit: float | None
    fuses: list = field(default_factory=list)


@st.composite
def bank_cases(draw, style=None, load=None, bus=None, P=None):
    style = style or draw(st.sampled_from(["bank", "explicit"]))
    S = draw(st.integers(1, 5))
    P = P or draw(st.integers(1, 5))
    E0, r0 = draw(VOLTS), draw(OHMS)
    capacity = draw(st.one_of(st.none(), st.integers(5, 400)))
    opt = lambda s: draw(st.one_of(st.none(), s))  # noqa: E731
    uniform = style == "bank"
    # ageing and EMF per bank, string and cell (the shorthand's targets)
    b_age = opt(FACTOR)
    s_age = [opt(FACTOR) for _ in range(P)]
    s_emf = [opt(SHIFT.map(lambda u: sig(E0 * (1 + u)))) for _ in range(P)]
    c_emf = [[opt(SHIFT.map(lambda u: sig(E0 * (1 + u)))) for _ in range(S)] for _ in range(P)]
    c_age = [[opt(FACTOR) for _ in range(S)] for _ in range(P)]
    emf = [[c_emf[j][i] or s_emf[j] or E0 for i in range(S)] for j in range(P)]
    one = lambda x: 1.0 if x is None else x  # noqa: E731
    r = [[r0 * (one(b_age) * one(s_age[j]) * one(c_age[j][i])) for i in range(S)] for j in range(P)]
    strap = opt(OHMS) if S > 1 else None
    lead = opt(OHMS)
    has_bus = (draw(st.booleans()) if bus is None else bus) and P > 1
    bus_r = draw(OHMS) if has_bus else None
    straps = [[strap if uniform or strap is None else draw(OHMS) for _ in range(S - 1)] for _ in range(P)]
    leads = [(lead, lead) if uniform or lead is None else (draw(OHMS), draw(OHMS)) for _ in range(P)]
    buses = [[bus_r if uniform else draw(OHMS) for _ in range(P - 1)] for _ in "+-"] if has_bus else None
    fuse = opt(st.tuples(AMPS, st.one_of(st.none(), OHMS), st.one_of(st.none(), AMPS)))
    tap = draw(st.sampled_from(["same", "opposite", "centre"]))
    tp, tn = {"same": (1, 1), "opposite": (1, P), "centre": ((P + 1) // 2, (P + 1) // 2)}[tap]
    name = "K"
    pos, neg = "bp", "bn"

    # ---- the elements, named as dcnet's bank shorthand names them (dcnet/language/banks.py) or our own
    if uniform:
        def junction(pole, j):
            if not has_bus:
                return pos if pole == "+" else neg
            if pole == "+":
                return pos if j == tp else f"{name}.pos.{j}"
            return neg if j == tn else f"{name}.neg.{j}"

        n_cell = lambda j, i: f"{name}.s{j}.c{i}"  # noqa: E731
        n_node = lambda j, i, end: f"{name}.s{j}.c{i}{end}"  # noqa: E731
        n_strap = lambda j, i: f"{name}.s{j}.strap{i}"  # noqa: E731
        n_fuse = lambda j: f"{name}.s{j}.fuse"  # noqa: E731
        n_fused = lambda j: f"{name}.s{j}.fused"  # noqa: E731
        n_lead = lambda j, end: f"{name}.s{j}.lead{end}"  # noqa: E731
        n_bus = lambda pole, j: f"{name}.bus{pole}.{j}"  # noqa: E731
    else:
        def junction(pole, j):
            if not has_bus:
                return pos if pole == "+" else neg
            if pole == "+":
                return pos if j == tp else f"p{j}"
            return neg if j == tn else f"n{j}"

        n_cell = lambda j, i: f"S{j}C{i}"  # noqa: E731
        n_node = lambda j, i, end: f"s{j}c{i}{'p' if end == '+' else 'm'}"  # noqa: E731
        n_strap = lambda j, i: f"ST{j}_{i}"  # noqa: E731
        n_fuse = lambda j: f"F{j}"  # noqa: E731
        n_fused = lambda j: f"s{j}f"  # noqa: E731
        n_lead = lambda j, end: f"LD{j}{'p' if end == '+' else 'm'}"  # noqa: E731
        n_bus = lambda pole, j: f"BUS{'p' if pole == '+' else 'm'}{j}"  # noqa: E731

    def cond(nm, a, b, res):
        if uniform:
            return El("link", nm, a, b, r=res)
        return conductor(draw, nm, a, b, res)

    els, strings, last_cells, fuses = [], [], [], []
    for j in range(1, P + 1):
        top, bottom = junction("+", j), junction("-", j)
        node = bottom
        E_k, R_k = 0.0, 0.0
        if lead is not None:
            node = n_node(j, 1, "-")
            els.append(cond(n_lead(j, "-"), node, bottom, leads[j - 1][1]))
            R_k += els[-1].r  # as written (a cable's r per length is rounded to 6 digits)
        for i in range(1, S + 1):
            last = i == S
            plus = top if (last and fuse is None and lead is None) else n_node(j, i, "+")
            e, rr = emf[j - 1][i - 1], r[j - 1][i - 1]
            els.append(El("cell", n_cell(j, i), plus, node, emf=e, r=rr, props=f"emf={q(e, 'V')} r={q(rr, 'Ohm')}"))
            E_k += e
            R_k += rr
            node = plus
            if not last and strap is not None:
                nxt = n_node(j, i + 1, "-")
                els.append(cond(n_strap(j, i), node, nxt, straps[j - 1][i - 1]))
                R_k += els[-1].r
                node = nxt
        last_cells.append(n_cell(j, S))
        if fuse is not None:
            after = top if lead is None else n_fused(j)
            rating, fr, intr = fuse
            props = f"rating={q(rating, 'A')}" + (f" r={q(fr, 'Ohm')}" if fr is not None else "") + (f" interrupt={q(intr, 'A')}" if intr else "")
            f = El("fuse", n_fuse(j), node, after, r=fr, props=props)
            f.interrupt = intr
            els.append(f)
            fuses.append(f)
            R_k += fr or 0.0
            node = after
        if lead is not None:
            els.append(cond(n_lead(j, "+"), node, top, leads[j - 1][0]))
            R_k += els[-1].r
        strings.append((E_k, R_k))
    if has_bus:
        for j in range(1, P):
            for k, pole in enumerate("+-"):
                els.append(cond(n_bus(pole, j), junction(pole, j), junction(pole, j + 1), buses[k][j - 1]))

    # ---- the main fuse and the load
    want_load = draw(st.booleans()) if load is None else load
    feed_r = 0.0
    load_el = None
    imb_limit = draw(st.one_of(st.none(), st.integers(1, 30)))
    circ_limit = draw(st.one_of(st.none(), AMPS)) if uniform else None
    main_lines = []
    if want_load:
        rating, mr, intr = draw(AMPS), draw(st.one_of(st.none(), OHMS)), draw(st.one_of(st.none(), AMPS))
        props = f"rating={q(rating, 'A')}" + (f" r={q(mr, 'Ohm')}" if mr is not None else "") + (f" interrupt={q(intr, 'A')}" if intr else "")
        mf = El("fuse", "FM", pos, "f", r=mr, props=props)
        mf.interrupt = intr
        main_lines.append(mf)
        fuses.append(mf)
        feed_r += mr or 0.0
        at = "f"
        if draw(st.booleans()):
            w = conductor(draw, "W", "f", "l", draw(OHMS), kinds=("resistor", "cable"))
            main_lines.append(w)
            feed_r += w.r
            at = "l"
        if draw(st.booleans()):
            rl = draw(OHMS)
            load_el = El("load", "L", at, neg, r=rl, props=f"r={q(rl, 'Ohm')}")
        else:
            frac = draw(st.floats(0.001, 0.5))
            # a fraction of what a bolted fault at the load's terminals would draw (reference)
            _, cur = ref_state(els + main_lines, neg, fault=(at, neg), fault_state=True)
            amps = sig(frac * abs(cur["fault"]))
            load_el = El("load", "L", at, neg, current=amps, props=f"current={q(amps, 'A')}")
        main_lines.append(load_el)
    els += main_lines

    # ---- the text
    head = []
    if uniform:
        part = f"part c cell emf={q(E0, 'V')} r={q(r0, 'Ohm')}" + (f" capacity={capacity}Ah" if capacity else "")
        props = [f"series={S}", f"parallel={P}", "cell=c"]
        if strap is not None:
            props.append(f"strap={q(strap, 'Ohm')}")
        if has_bus:
            props.append(f"bus={q(bus_r, 'Ohm')}")
        if lead is not None:
            props.append(f"lead={q(lead, 'Ohm')}")
        if fuse is not None:
            props.append(f"fuse={q(fuse[0], 'A')}")
            if fuse[1] is not None:
                props.append(f"fuse_r={q(fuse[1], 'Ohm')}")
            if fuse[2]:
                props.append(f"interrupt={q(fuse[2], 'A')}")
        props.append(f"tap={tap}")
        if b_age is not None:
            props.append(f"ageing={b_age!r}")
        for j in range(P):
            if s_age[j] is not None:
                props.append(f"s{j + 1}.ageing={s_age[j]!r}")
            if s_emf[j] is not None:
                props.append(f"s{j + 1}.emf={q(s_emf[j], 'V')}")
            for i in range(S):
                if c_emf[j][i] is not None:
                    props.append(f"s{j + 1}.c{i + 1}.emf={q(c_emf[j][i], 'V')}")
                if c_age[j][i] is not None:
                    props.append(f"s{j + 1}.c{i + 1}.ageing={c_age[j][i]!r}")
        head = [part]
        body = [f"bank {name} {pos} {neg} " + " ".join(props)] + [e.line() for e in main_lines]
    else:
        body = [e.line() for e in els]
    tail = [f"ground {neg}"]
    if P > 1 and (imb_limit is not None or not uniform):
        among = name if uniform else ",".join(last_cells)
        tail.append("limit imbalance" + (f" max={imb_limit}%" if imb_limit is not None else "") + f" among={among}")
    if circ_limit is not None and P > 1:
        tail.append(f"limit circulating max={q(circ_limit, 'A')} among={name}")
    if uniform and circ_limit is None and capacity and P > 1:
        circ_limit = capacity / 20  # C/20 of the smallest string capacity (common practice, no source)
    elif not uniform or P == 1:
        circ_limit = None
    text = "\n".join(head + body + tail) + "\n"
    return BankCase(
        style, S, P, text, els, pos, neg, name if uniform else None, has_bus, strings, last_cells, load_el, feed_r,
        10.0 if imb_limit is None else float(imb_limit), circ_limit, fuses,
    )


def verdict_map(sol, rule):
    return {v.subject: v for v in sol.verdicts if v.rule == rule}


def millman(strings, g_load=0.0, i_load=0.0):
    """Millman's theorem: the common voltage of EMFs E_k behind R_k in parallel, with a load of
    conductance g_load and a constant current i_load; and each string's current out of its + end."""
    v = (sum(e / r for e, r in strings) - i_load) / (sum(1 / r for _, r in strings) + g_load)
    return v, [(e - v) / r for e, r in strings]


def roundoff(els, pot) -> float:
    """What floating point leaves on a current computed as g x (V_a - V_b) in any nodal solve,
    reference or dcnet: about 100 x 2.2e-16 of the largest conductance times the largest
    potential (a numerical bound, no source needed; README, "Numerical honesty", says the same)."""
    g = max(1.0 / e.r for e in els if e.r)
    return 2e-14 * g * max(abs(v) for v in pot.values())


def potential_roundoff(els, pot) -> float:
    """A forward-error estimate of node potentials in any nodal solve: n x eps x kappa x max|V|,
    the condition number kappa taken as the ratio of the largest to the smallest conductance
    (the standard bound |dx|/|x| <= kappa eps of a linear solve, e.g. Golub and Van Loan, Matrix
    Computations, section 2.6; kappa of a nodal matrix from its conductance spread, a rough
    estimate). Drops are differences of nearly equal potentials, so this decides their digits."""
    g = [1.0 / e.r for e in els if e.r]
    eps = 2.2e-16
    return len(pot) * eps * (max(g) / min(g)) * max(abs(v) for v in pot.values())


def stated_bound(sol, names) -> float:
    """The largest round-off bound dcnet states for these currents: a current within its bound
    reads zero (README, "Currents within round-off are zero"), so the reference may differ by it.
    A tolerance, not a reference: the reference value itself is computed here."""
    return max(float(sol.current_bounds[sol.netlist.element_position(n)]) for n in names)


def imbalance_tolerance(currents, delta):
    """The change of imbalance_pct when each current moves by at most delta (first order)."""
    mean = abs(sum(currents) / len(currents))
    return (200 + imbalance_pct(currents)) * delta / mean


def imbalance_pct(currents):
    mean = sum(currents) / len(currents)
    return max(abs(c - mean) for c in currents) / abs(mean) * 100


DETAIL = re.compile(r"worst bolted fault from (\S+) to (\S+):")


# ------------------------------------------------------------------ 1. fault currents
@settings(max_examples=30, **SETTINGS)
@given(case=bank_cases(load=True))
def test_fault_current_is_the_worst_bolted_fault_over_every_other_group(case):
    # Reference: every bolted fault from either end of each fuse to every node of another
    # conductor group, solved as merged nodes by reference.py (Kirchhoff's laws), constant-current
    # loads drawing nothing; the verdict is the largest current through the fuse.
    sol = dcnet.parse(case.text).solve()
    faults = verdict_map(sol, "fault current")
    expected = {f.name for f in case.fuses} | ({f"bank {case.bank} terminals"} if case.bank else set())
    assert set(faults) == expected
    for f in case.fuses:
        v = faults[f.name]
        pairs = worst_faults(case.els, case.neg, f)
        best = max(pairs.values())
        assert v.value == pytest.approx(best, rel=1e-9), (f.name, case.text)
        end, ret = DETAIL.search(v.detail).groups()
        assert pairs[(end, ret)] == pytest.approx(best, rel=1e-9), (f.name, v.detail)
        if f.interrupt:
            assert v.limit == f.interrupt
            if abs(best - f.interrupt) > 1e-6 * f.interrupt:
                assert v.ok is (best <= f.interrupt)
        else:
            assert v.sense == "info" and v.ok is True
    if case.bank:
        v = faults[f"bank {case.bank} terminals"]
        _, cur = ref_state(case.els, case.neg, fault=(case.pos, case.neg), fault_state=True)
        assert v.value == pytest.approx(abs(cur["fault"]), rel=1e-9)  # Kirchhoff's laws (reference.py)
        if not case.has_bus:
            # Norton: strings E_k behind R_k in parallel into a bolted fault: sum(E_k / R_k)
            assert v.value == pytest.approx(sum(e / r for e, r in case.strings), rel=1e-9)


# ------------------------------------------------------------------ 2. imbalance and circulating current
@settings(max_examples=40, **SETTINGS)
@given(case=bank_cases(load=True, bus=False).filter(lambda c: c.P > 1))
def test_imbalance_is_millmans_closed_form(case):
    # Millman's theorem: strings (E_k, R_k) in parallel between the bank's terminals, with the
    # load behind the main fuse and cable (resistive: conductance 1/(R_L + feed); constant current)
    sol = dcnet.parse(case.text).solve()
    L = case.load
    if L.current is None:
        _, cur = millman(case.strings, g_load=1.0 / (L.r + case.feed_r))
    else:
        _, cur = millman(case.strings, i_load=L.current)
    expected = imbalance_pct(cur)
    pot, _ = ref_state(case.els, case.neg)
    tol = imbalance_tolerance(cur, max(roundoff(case.els, pot), stated_bound(sol, case.last_cells)))
    subject = f"bank {case.bank}" if case.bank else ", ".join(case.last_cells)
    (v,) = [v for v in sol.verdicts if v.rule == "imbalance" and v.subject == subject]
    assert v.value == pytest.approx(expected, rel=1e-9, abs=tol)
    assert v.limit == pytest.approx(case.imbalance_limit, rel=1e-12)
    if abs(expected - case.imbalance_limit) > 1e-6:
        assert v.ok is (expected <= case.imbalance_limit)


@settings(max_examples=30, **SETTINGS)
@given(case=bank_cases(load=True, bus=True).filter(lambda c: c.has_bus))
def test_imbalance_with_bus_resistance_is_the_nodal_solution(case):
    # with resistive bus segments the strings no longer share two nodes: reference.py instead
    sol = dcnet.parse(case.text).solve()
    pot, cur = ref_state(case.els, case.neg)
    strings = [cur[c] for c in case.last_cells]
    expected = imbalance_pct(strings)
    tol = imbalance_tolerance(strings, max(2 * roundoff(case.els, pot), stated_bound(sol, case.last_cells)))  # round-off in both solves
    subject = f"bank {case.bank}" if case.bank else ", ".join(case.last_cells)
    (v,) = [v for v in sol.verdicts if v.rule == "imbalance" and v.subject == subject]
    assert v.value == pytest.approx(expected, rel=1e-9, abs=tol)


@settings(max_examples=30, **SETTINGS)
@given(case=bank_cases(load=False))
def test_no_imbalance_verdict_at_rest(case):
    # no load: the net current of the strings is zero (Kirchhoff's current law), so the imbalance
    # is not judged, whatever the strings exchange among themselves
    sol = dcnet.parse(case.text).solve()
    assert [v for v in sol.verdicts if v.rule == "imbalance"] == []


@settings(max_examples=30, **SETTINGS)
@given(case=bank_cases(style="bank", bus=None, P=2), with_load=st.booleans())
def test_circulating_current_of_two_strings_is_ohms_law(case, with_load):
    # Ohm's law around the loop of two strings at rest: dE / (R1 + R2), with both bus segments
    # in the loop when there are any; the bank alone, whatever load the file has
    sol = dcnet.parse(case.text).solve()
    (e1, r1), (e2, r2) = case.strings
    loop = r1 + r2 + (2 * float(re.search(r"bus=(\S+)Ohm", case.text).group(1)) if case.has_bus else 0.0)
    expected = abs(e1 - e2) / loop
    (v,) = [v for v in sol.verdicts if v.rule == "circulating current"]
    pot, _ = ref_state(case.els, case.neg)
    assert v.value == pytest.approx(expected, rel=1e-9, abs=roundoff(case.els, pot))
    if case.circulating_limit is not None:
        assert v.limit == pytest.approx(case.circulating_limit, rel=1e-12)
        if abs(expected - case.circulating_limit) > 1e-6 * case.circulating_limit:
            assert v.ok is (expected <= case.circulating_limit)
    else:
        assert v.sense == "info"


@settings(max_examples=30, **SETTINGS)
@given(case=bank_cases(style="bank", bus=False).filter(lambda c: c.P > 1))
def test_circulating_current_of_many_strings_is_millmans(case):
    # Millman's theorem with nothing drawn: the largest |(E_k - V) / R_k|
    sol = dcnet.parse(case.text).solve()
    _, cur = millman(case.strings)
    (v,) = [v for v in sol.verdicts if v.rule == "circulating current"]
    pot, _ = ref_state(case.els, case.neg)
    assert v.value == pytest.approx(max(abs(c) for c in cur), rel=1e-9, abs=roundoff(case.els, pot))


# ================================================================== 3. voltage drop on feeders
RHO = {"copper": (0.017241, 0.00393), "aluminium": (0.028264, 0.00403)}  # IEC 60028 copper; aluminium 61 % IACS (from memory)
GAUGES = {"14": 14, "12": 12, "10": 10, "8": 8, "6": 6, "4": 4, "2": 2, "1/0": 0, "2/0": -1, "4/0": -3}


def awg_area_mm2(n: int) -> float:
    d = 0.127 * 92 ** ((36 - n) / 39)  # ASTM B258 diameter rule (from memory)
    return math.pi / 4 * d * d


@st.composite
def feeder_element(draw, name, a, b):
    """A cable (size or gauge, copper or aluminium, a temperature), a fuse (with r or ideal), a
    resistor, or a cable with a resistance per length."""
    kind = draw(st.sampled_from(["cable", "cable_r", "fuse", "resistor"]))
    if kind == "cable":
        metal = draw(st.sampled_from(sorted(RHO)))
        temp = draw(st.integers(-20, 90))
        length = sig(draw(st.floats(0.1, 20.0)))
        if draw(st.booleans()):
            size = draw(st.sampled_from([1.5, 2.5, 4, 6, 10, 16, 25, 35, 50, 70, 95]))
            area, spec = float(size), f"size={size}mm2"
        else:
            g = draw(st.sampled_from(sorted(GAUGES)))
            area, spec = awg_area_mm2(GAUGES[g]), f"gauge={g}"
        rho, alpha = RHO[metal]
        res = rho * (1 + alpha * (temp - 20)) * length / area  # R = rho20 (1 + alpha dT) L / A
        return El("cable", name, a, b, r=res, props=f"length={q(length, 'm')} {spec} metal={metal} temp={temp}degC")
    if kind == "cable_r":
        return conductor(draw, name, a, b, draw(OHMS), kinds=("cable",))
    if kind == "fuse":
        fr = draw(st.one_of(st.none(), OHMS))
        return El("fuse", name, a, b, r=fr, props="rating=100A" + (f" r={q(fr, 'Ohm')}" if fr is not None else ""))
    return conductor(draw, name, a, b, draw(OHMS), kinds=("resistor",))


@st.composite
def chain(draw, prefix, start, end, n_min=1):
    """A series of 1..5 feeder elements from node start to node end."""
    n = draw(st.integers(n_min, 5))
    nodes = [start] + [f"{prefix}{k}" for k in range(1, n)] + [end]
    return [draw(feeder_element(f"{prefix.upper()}{k}", nodes[k], nodes[k + 1])) for k in range(n)]


@dataclass
class FeederCase:
    text: str
    els: list
    loads: dict  # load name -> (plus terminal node, minus terminal node) of its feeding chain
    ground: str


@st.composite
def feeder_cases(draw):
    n = draw(st.integers(1, 5))
    els = []
    plus = []  # each cell's positive node
    node = "n0"
    for i in range(1, n + 1):
        top = f"c{i}"
        e, r = draw(VOLTS), draw(OHMS)
        els.append(El("cell", f"C{i}", top, node, emf=e, r=r, props=f"emf={q(e, 'V')} r={q(r, 'Ohm')}"))
        plus.append(top)
        node = top
        if i < n and draw(st.booleans()):  # a strap to the next cell
            els.append(draw(feeder_element(f"K{i}", top, f"c{i}s")))
            node = f"c{i}s"
    top = plus[-1]
    els += draw(chain("p", top, "lp"))
    els += draw(chain("m", "lm", "n0"))
    loads = {}
    n_loads = draw(st.integers(1, 5))
    kinds = [draw(st.sampled_from(["r", "i"])) for _ in range(n_loads)]
    tap = None
    if n > 1 and draw(st.booleans()):
        k = draw(st.integers(1, n - 1))
        start = draw(st.sampled_from([f"c{k}"] + ([f"c{k}s"] if any(e.a == f"c{k}" and e.b == f"c{k}s" for e in els) else [])))
        els += draw(chain("t", start, "tp"))
        els += draw(chain("u", "tm", "n0"))
        tap = (k, draw(st.sampled_from(["r", "i"])))
    # loads: resistive now; constant-current ones get a fraction of their terminals' bolted-fault current
    fracs = {}
    for j, kind in enumerate(kinds, 1):
        name = f"L{j}"
        loads[name] = (top, "n0")
        if kind == "r":
            rl = draw(OHMS)
            els.append(El("load", name, "lp", "lm", r=rl, props=f"r={q(rl, 'Ohm')}"))
        else:
            fracs[name] = (draw(st.floats(0.001, 0.3)) / n_loads, "lp", "lm")
    if tap:
        k, kind = tap
        loads["T"] = (f"c{k}", "n0")
        if kind == "r":
            rl = draw(OHMS)
            els.append(El("load", "T", "tp", "tm", r=rl, props=f"r={q(rl, 'Ohm')}"))
        else:
            fracs["T"] = (draw(st.floats(0.001, 0.3)), "tp", "tm")
    fixed = list(els)
    for name, (frac, a, b) in fracs.items():
        _, cur = ref_state(fixed, "n0", fault=(a, b), fault_state=True)
        amps = sig(frac * abs(cur["fault"]))
        els.append(El("load", name, a, b, current=amps, props=f"current={q(amps, 'A')}"))
    text = "\n".join(e.line() for e in els) + "\nground n0\n"
    return FeederCase(text, els, loads, "n0")


@settings(max_examples=50, **SETTINGS)
@given(case=feeder_cases())
def test_drop_is_the_share_of_the_feeding_section_lost_on_the_way(case):
    # Kirchhoff's laws (reference.py); the definition of dcnet/analysis/sections.py: the section
    # voltage is the voltage between the feeding cell chain's terminals (the top of the string for
    # loads at its end, the top of the lower cells for the mid tap), the drop its share lost
    # before the load's terminals
    pot, cur = ref_state(case.els, case.ground)
    by_name = {e.name: e for e in case.els}
    sol = dcnet.parse(case.text).solve()
    drops = verdict_map(sol, "voltage drop")
    for name, (plus, minus) in case.loads.items():
        L = by_name[name]
        section = pot[plus] - pot[minus]
        v_load = pot[L.a] - pot[L.b]
        assume(section > 0 and v_load > 0)  # drawn to hold; a physical feeder
        expected = (section - v_load) / section * 100
        v = drops[f"to load {name}"]
        tol = 100 * potential_roundoff(case.els, pot) / section
        assert v.value == pytest.approx(expected, rel=1e-9, abs=max(1e-9, tol)), (name, case.text)
        assert v.limit == 5.0  # practice general, other loads (common practice, no source)
        if abs(expected - 5.0) > 1e-6:
            assert v.ok is (expected <= 5.0)


# ================================================================== 4. the cell window
# per-cell (vmin, vmax, rest_min, rest_max) in volts, from memory (as dcnet/data/chemistries.tsv gives them)
CHEM = {
    "lead-acid": (1.75, 2.40, 1.93, 2.17),
    "agm": (1.75, 2.40, 1.93, 2.17),
    "gel": (1.75, 2.40, 1.93, 2.17),
    "lifepo4": (2.5, 3.65, 2.80, 3.45),
    "nmc": (3.0, 4.2, 3.00, 4.20),
    "lto": (1.5, 2.7, 1.90, 2.80),
    "nimh": (1.0, None, 1.10, 1.45),
}


@st.composite
def window_cases(draw):
    chem = draw(st.sampled_from(sorted(CHEM)))
    vmin, vmax, rmin, rmax = CHEM[chem]
    n = draw(st.integers(1, min(24, int(60 // rmax))))
    emf = sig(n * (rmin + draw(st.floats(0.0, 1.0)) * (rmax - rmin)))
    assume(n * rmin <= emf <= n * rmax)
    r = draw(OHMS)
    hi = vmax if vmax is not None else 1.6
    mv = draw(st.integers(int(round((vmin - 0.3) * 1000)), int(round((hi + 0.3) * 1000))))  # per cell, millivolts
    return chem, n, emf, r, mv


def window_text(chem, n, emf, r, mv, r_ch=None):
    held = n * (mv / 1000)
    if r_ch is None:
        charger = f"source CH pos neg emf={q(held, 'V')}"  # an ideal source holds the terminals at n x u
    else:
        # a charger behind r_ch set so that Millman's theorem puts the terminals at n x u
        e_ch = emf + (held - emf) * (r_ch + r) / r
        charger = f"source CH pos neg emf={q(e_ch, 'V')} r={q(r_ch, 'Ohm')}"
    return f"cell B pos neg emf={q(emf, 'V')} r={q(r, 'Ohm')} chemistry={chem} cells={n}\n{charger}\nground neg\n"


@settings(max_examples=60, **SETTINGS)
@given(case=window_cases())
@example(case=("lead-acid", 6, 12.7, 0.005, 2400))  # exactly at the charge limit: 14.4 V, not above it
@example(case=("lead-acid", 6, 12.7, 0.005, 2401))
@example(case=("lifepo4", 16, 52.8, 0.02, 3650))
@example(case=("nmc", 3, 11.1, 0.03, 4200))
def test_the_window_fails_exactly_above_the_charge_limit(case):
    # held by an ideal source, the terminal voltage is n x u (Kirchhoff's voltage law); the
    # verdicts fail exactly when u is above vmax or below vmin (per-cell values from memory)
    chem, n, emf, r, mv = case
    vmin, vmax, _, _ = CHEM[chem]
    sol = dcnet.parse(window_text(chem, n, emf, r, mv)).solve()
    w = {v.rule: v for v in sol.verdicts if v.subject == "B" and v.rule.startswith("cell voltage")}
    assert sol.voltage("B") == pytest.approx(n * mv / 1000, rel=1e-12)
    if vmax is None:
        assert "cell voltage (highest)" not in w  # NiMH: no fixed charge limit
    else:
        hi = w["cell voltage (highest)"]
        assert hi.limit == pytest.approx(n * vmax, rel=1e-12)
        assert hi.ok is (mv <= round(vmax * 1000)), (mv, hi)
    lo = w["cell voltage (lowest)"]
    assert lo.limit == pytest.approx(n * vmin, rel=1e-12)
    assert lo.ok is (mv >= round(vmin * 1000)), (mv, lo)


@settings(max_examples=40, **SETTINGS)
@given(case=window_cases(), r_ch=OHMS)
def test_the_window_behind_a_charger_resistance(case, r_ch):
    # Millman's theorem for the charger (E_ch behind r_ch) and the cell (E behind r) in parallel
    chem, n, emf, r, mv = case
    vmin, vmax, _, _ = CHEM[chem]
    text = window_text(chem, n, emf, r, mv, r_ch)
    e_ch = float(re.search(r"source CH pos neg emf=(\S+)V", text).group(1))
    v = (e_ch / r_ch + emf / r) / (1 / r_ch + 1 / r)
    per = v / n
    sol = dcnet.parse(text).solve()
    w = {x.rule: x for x in sol.verdicts if x.subject == "B" and x.rule.startswith("cell voltage")}
    assert w["cell voltage (lowest)"].value == pytest.approx(v, rel=1e-9)
    # within 1e-9 of a limit round-off decides, in the reference as in dcnet: not asserted there
    if vmax is not None and abs(per - vmax) > 1e-9 * vmax:
        assert w["cell voltage (highest)"].ok is (per <= vmax)
    if abs(per - vmin) > 1e-9 * vmin:
        assert w["cell voltage (lowest)"].ok is (per >= vmin)


# ================================================================== 5. invariants
def any_text():
    return st.one_of(
        bank_cases().map(lambda c: c.text),
        feeder_cases().map(lambda c: c.text),
        window_cases().map(lambda c: window_text(*c)),
    )


@settings(max_examples=40, **SETTINGS)
@given(text=any_text())
def test_no_verdict_is_nan_and_every_one_serialises(text):
    # NaN is not a value: a verdict that cannot be judged is left out, not given NaN (common
    # practice, no source); only the wiring checks of structure carry no value at all
    sol = dcnet.parse(text).solve()
    for v in sol.verdicts:
        if v.value is None:
            assert v.rule == "wiring", v
        else:
            assert not math.isnan(v.value), v
        assert v.limit is None or not math.isnan(v.limit), v
    json.dumps([v.to_dict() for v in sol.verdicts], allow_nan=False)


def run_check(text):
    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "c.dcn")
        with open(path, "w") as f:
            f.write(text)
        out = io.StringIO()
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(io.StringIO()):
            code = main(["check", path, "--format", "json"])
    return code, json.loads(out.getvalue())


@settings(max_examples=25, **SETTINGS)
@given(text=any_text())
def test_check_exits_1_exactly_when_a_verdict_fails(text):
    # README, Commands: exit 0 when every check passed, 1 when one failed
    code, data = run_check(text)
    sol = dcnet.parse(text).solve()
    failed = any(not v.ok for v in sol.verdicts)
    assert code == (1 if failed else 0)
    assert code == (1 if any(not c["ok"] for c in data["checks"]) else 0)


def verdict_table(sol):
    return sorted((v.rule, v.subject, v.value, v.ok) for v in sol.verdicts)


@settings(max_examples=30, **SETTINGS)
@given(text=any_text(), data=st.data())
def test_the_order_of_elements_does_not_change_the_verdicts(text, data):
    # a circuit is a set of elements: listing them in another order changes nothing (Kirchhoff's
    # laws do not read the file's order); part lines first, ground and limit lines last
    lines = text.strip().split("\n")
    head = [x for x in lines if x.startswith("part ")]
    tail = [x for x in lines if x.startswith(("ground ", "limit "))]
    body = [x for x in lines if x not in head and x not in tail]
    shuffled = data.draw(st.permutations(body))
    other = "\n".join(head + list(shuffled) + tail) + "\n"
    a = verdict_table(dcnet.parse(text).solve())
    b = verdict_table(dcnet.parse(other).solve())
    assert [(r, s) for r, s, _, _ in a] == [(r, s) for r, s, _, _ in b]
    for (rule, subject, va, oka), (_, _, vb, okb) in zip(a, b):
        if va is None or vb is None:
            assert va is vb, (rule, subject)
            continue
        assert vb == pytest.approx(va, rel=1e-9, abs=1e-9), (rule, subject, other)
        assert oka is okb, (rule, subject, va, vb, other)
