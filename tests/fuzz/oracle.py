"""The fuzz oracle's physics, written in the test from the netlist's own records (element kinds,
values and node names) and the solution's element currents and node potentials only; nothing of
dcnet's balance figures, self-check or scaling is used.

Two checks of a solved answer:

* :func:`kcl_violations`: Kirchhoff's current law at every node, each node judged against the
  currents that meet there (not against the largest current in the network, which is how a
  1 nOhm / 1 GOhm network passed a wrong answer).
* :func:`passivity_violations`: no resistance, diode or resistive / constant-power load
  delivers power (a cable at -250 degC with a negative resistance would).
* :func:`potential_bound`: a bound every node potential of a true operating point obeys (the
  derivation is in the docstring), or None where no sound bound is known for the circuit.
"""

from __future__ import annotations

import math

import numpy as np

#: relative tolerance of the node balance against the currents meeting at the node (the
#: solves are in double precision; a true answer is within ~1e-12 of this)
KCL_RELATIVE = 1e-6
#: relative slack of the potential bound: round-off of an ill-conditioned solve (a dangling node
#: 3e-6 above a 649 kV cell behind 516 kOhm was seen) is not what the bound is for
BOUND_RELATIVE = 1e-4
#: currents and voltages below this fraction of the network's largest are round-off
ROUND_OFF = 1e-9


def _num(x) -> float | None:
    try:
        x = float(x)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


#: a double-precision nodal solve carries each source's term (a cell's EMF / r, a supply's current)
#: with a relative round-off of a few times 1e-16; currents far below that term cannot be resolved
#: at all (a 1 micro-ohm cell at 250 kV has a 2.5e11 A term): 1e-12 of the largest such term,
#: about 4,500 units of round-off, is admitted as the floor of the node balance
SOURCE_ROUND_OFF = 1e-12


def _source_scale(net) -> float:
    """The largest source term of the network, from the netlist's own values: |emf| / r of cells
    and sources with a resistance, |current| of supplies and constant-current loads."""
    out = 0.0
    for e in net.elements:
        emf, r, cur = _num(e.values.get("emf")), _num(e.values.get("r")), _num(e.values.get("current"))
        if emf is not None and r is not None and r > 0:
            out = max(out, abs(emf) / r)
        if cur is not None:
            out = max(out, abs(cur))
    return out


def kcl_violations(net, potentials, currents) -> list[str]:
    """Nodes where the currents leaving do not sum to zero.

    For every element (first node a, second node b, passive current i from a to b), i leaves a
    and enters b. At node n: ``net = sum(i leaving) - sum(i entering)``; it is judged against
    ``meet = sum(|i|)`` of the elements with a terminal at n (an element from n to n neither
    leaves nor enters). A node is in violation when
    ``|net| > KCL_RELATIVE * meet + ROUND_OFF * max|i|``: the second term admits currents that
    dcnet sets to zero because they are within the solve's round-off (a few ulps of the
    network's largest current), judged here without dcnet's own bound figures."""
    i = np.asarray(currents, dtype=float)
    if not np.all(np.isfinite(i)):
        bad = [e.name for e, x in zip(net.elements, i) if not math.isfinite(x)]
        return [f"non-finite current in {', '.join(bad[:5])}"]
    n_nodes = len(net.node_index)
    balance = np.zeros(n_nodes)
    meet = np.zeros(n_nodes)
    for k, e in enumerate(net.elements):
        a, b = net.node_index[e.nodes[0]], net.node_index[e.nodes[1]]
        if a == b:
            continue
        balance[a] += i[k]
        balance[b] -= i[k]
        meet[a] += abs(i[k])
        meet[b] += abs(i[k])
    floor = ROUND_OFF * (np.abs(i).max() if len(i) else 0.0) + SOURCE_ROUND_OFF * _source_scale(net)
    names = list(net.node_index)
    out = []
    for n in np.flatnonzero(np.abs(balance) > KCL_RELATIVE * meet + floor):
        zero = [e.name for k, e in enumerate(net.elements) if i[k] == 0.0 and n in (net.node_index[e.nodes[0]], net.node_index[e.nodes[1]])]
        out.append(
            f"node {names[n]}: currents sum to {balance[n]:.6g} A, {meet[n]:.6g} A meet there"
            + (f" (reported at exactly 0 A: {', '.join(zero[:4])})" if zero else "")
        )
    return out


#: kinds whose law never delivers power (a resistance, a diode, a constant-power load)
PASSIVE = ("resistor", "cable", "fuse", "switch", "link", "diode")


def passivity_violations(net, v, i) -> list[str]:
    """Passive elements that deliver power: v*i < 0 with both v and i above round-off (a
    resistance, cable, fuse, switch, link, diode, resistive or constant-power load; their laws
    send current from the higher terminal to the lower one)."""
    v = np.asarray(v, dtype=float)
    i = np.asarray(i, dtype=float)
    if not len(i):
        return []
    # an element's voltage is a difference of potentials, whose round-off scales with the
    # EMFs that set them: a link across a short of a 400 kV source shows some 1e-10 V however
    # small the other voltages are
    emfs = [abs(float(e.values["emf"])) for e in net.elements if isinstance(e.values.get("emf"), (int, float))]
    vtol = ROUND_OFF * max(float(np.abs(v).max()), max(emfs, default=0.0)) + 1e-12
    itol = ROUND_OFF * np.abs(i).max() + 1e-15
    # an ideal connection (a link, switch or fuse with no r) has no voltage at all: what it shows
    # is the potentials' round-off, which the largest current makes across the largest
    # resistance (1.1 pV across a link carrying 64 kA beside a 911 kOhm part was seen)
    rs = [abs(float(e.values["r"])) for e in net.elements if isinstance(e.values.get("r"), (int, float)) and np.isfinite(e.values["r"])]
    vtol_ideal = vtol + 1e-15 * float(np.abs(i).max()) * max(rs, default=1.0)
    out = []
    for k, e in enumerate(net.elements):
        passive = e.kind in PASSIVE or (e.kind == "load" and e.values.get("current") is None)
        ideal = e.kind in ("link", "switch", "fuse") and not e.values.get("r")
        if passive and v[k] * i[k] < 0 and abs(v[k]) > (vtol_ideal if ideal else vtol) and abs(i[k]) > itol:
            out.append(f"{e.kind} {e.name} delivers {-v[k] * i[k]:.6g} W (v={v[k]:.6g} V, i={i[k]:.6g} A)")
    return out


def potential_bound(net) -> tuple[float | None, str]:
    """(bound, how): every node potential of a true operating point lies in [-bound, bound]
    (ground at 0 V), or (None, why) where no sound bound is known.

    Derivation (a cut argument; ours, no source). Draw each cell or source with internal
    resistance as an ideal EMF in series with its resistance. Every other element is *passive
    in the strong sense*: its current flows from its higher terminal to its lower one or is
    zero (resistors, cables, fuses, switches, links, resistive and constant-power loads, diodes
    with drop >= 0 or a junction law). Let m and M be the lowest and highest node potentials
    and take any threshold t in (m, M) that is no node's potential. The nodes above t form a
    set U; Kirchhoff's current law summed over U says the currents leaving U across the cut add
    to zero.

    * Without current sources (no ``supply``, no ``load current=``, no ``source imax=``): if no
      EMF crosses the cut, every crossing element is passive and carries current out of U, so
      all carry none, and the cut is bridged only by elements at zero current (an island held
      by leaks, which a solver places between its neighbours). Each t not covered by the
      voltage interval of some EMF is such a cut; the EMFs' intervals cover at most
      S = sum(|emf|). Hence M - m <= S and, since ground (0 V) is a node, every potential is
      within [-S, S]. This is the strict bound.
    * With current sources of total J = sum(|current|) + sum(imax), in a cut not crossed by an
      EMF the passive elements crossing it carry together what the current sources bring in,
      at most J, so each carries at most J. If every passive element is a plain resistance
      (no diodes, constant-power loads or open switches, whose voltage is not bounded by their
      current), a resistance r crossing such a cut has |v| <= r*J, and the cuts not covered by
      EMFs cover at most J * R, R = the sum of all resistances (internal ones included). Hence
      every potential is within [-(S + J*R), S + J*R]. This is the loose bound.
    * Otherwise (current sources with diodes, constant-power loads or open switches) no bound
      is claimed: the Kirchhoff check still applies."""
    emf = 0.0
    current = 0.0
    resistance = 0.0
    shapeless = []
    for e in net.elements:
        v = e.values
        if e.kind in ("cell", "source"):
            x = _num(v.get("emf"))
            if x is None:
                return None, f"EMF of {e.name} unknown"
            emf += abs(x)
            if e.kind == "source" and v.get("imax") is not None:
                x = _num(v.get("imax"))
                if x is None:
                    return None, f"imax of {e.name} unknown"
                current += abs(x)
        elif e.kind == "supply" or (e.kind == "load" and v.get("current") is not None):
            x = _num(v.get("current"))
            if x is None:
                return None, f"current of {e.name} unknown"
            current += abs(x)
        if e.kind == "diode" or (e.kind == "load" and v.get("power") is not None) or (e.kind == "switch" and v.get("state") == "open"):
            shapeless.append(e.name)
        elif v.get("r") is not None and e.kind not in ("diode",):
            r = _num(v.get("r"))
            if r is None:
                return None, f"resistance of {e.name} unknown"
            resistance += abs(r)
    if current == 0.0:
        return emf * (1 + BOUND_RELATIVE) + 1e-9, f"strict: sum of |EMF| = {emf:.6g} V"
    if shapeless:
        return None, f"current sources with {shapeless[0]}"
    b = emf + current * resistance
    if not math.isfinite(b):
        return None, "bound overflows"
    return b * (1 + BOUND_RELATIVE) + 1e-9, f"loose: {emf:.6g} V + {current:.6g} A x {resistance:.6g} Ohm"


def bound_violations(net, potentials) -> list[str]:
    """Nodes whose potential lies beyond :func:`potential_bound`."""
    bound, how = potential_bound(net)
    if bound is None:
        return []
    p = np.asarray(potentials, dtype=float)
    names = list(net.node_index)
    bad = np.flatnonzero(~(np.abs(p) <= bound))
    return [f"node {names[k]} at {p[k]:.6g} V beyond the physical bound {bound:.6g} V ({how})" for k in bad[:5]]
