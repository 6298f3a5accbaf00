"""Wiring: mistakes that leave a circuit solvable but wrong, failed with their culprits.

* **A source driven backwards**: a ``source`` (charger, DC bus) or ``supply`` absorbing power
  beyond the solve's round-off, as when a bank is wired backwards against its charger. (A
  cell absorbing power is charging, which is no mistake.)
* **A load with no supply**: a load that draws nothing because nothing could drive it: its
  terminals are not joined through the rest of the circuit (a misspelt node, a dead end), or
  only through parts that hold no source. A load idle because an open switch, a blocked diode or
  a balanced circuit leaves it so is not a mistake; neither is a constant-power load that
  dropped out at its ``vmin`` (the solve warns of that).
* **A conductor that ends nowhere**: a cable, fuse, link, resistor or closed switch one of
  whose nodes nothing else touches.

A node used only once that is one edit from another node's name is named as the likely
misspelling. A bank's or a battery's free terminals are not mistakes (a cell or source with a
free terminal only gets a spelling hint in the warnings when one edit from another node).
Every verdict here fails or stays silent ("quiet" series): the structure is sound otherwise.
"""

from __future__ import annotations

import numpy as np

from . import Series, elements_of

__all__ = ["rules"]

SOURCE = "circuit wiring (Kirchhoff's laws)"
_CONDUCTORS = ("cable", "fuse", "link", "resistor", "switch")


def _components(bt, skip: int) -> np.ndarray:
    """Components of the graph of every element (open ones too) but ``skip``."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    m = np.ones(bt.n_elements, dtype=bool)
    m[skip] = False
    n = bt.n_nodes
    adj = coo_matrix((np.ones(int(m.sum())), (bt.a[m], bt.b[m])), shape=(n, n))
    return connected_components(adj, directed=False)[1]


def rules(net, s) -> list[Series]:
    from ..kinds import KINDS
    from ..topology import node_uses, spelling_suggestion

    out: list[Series] = []
    bt = s.branches
    uses = node_uses(net)

    def hint(node_names) -> str:
        tips = []
        for nd in node_names:
            near = spelling_suggestion(net, nd, uses)
            if near:
                tips.append(f"node '{nd}' is used only here: did you mean '{near}'?")
        return (" " + " ".join(tips)) if tips else ""

    # sources driven backwards
    for el in elements_of(net, "source", "supply"):
        p = s.power(el.name)
        # the rounding of both factors: a supply across an ideal link shows some 1 pV beside its
        # 400 kA, and that is no polarity mistake
        tol = s.bound(el.name) * np.abs(s.voltage(el.name)) + s.vbound(el.name) * np.abs(s.current(el.name)) + 1e-12 * np.abs(p)
        bad = p > tol
        detail = ""
        if s.single and bad[0]:
            detail = (
                f"{el.kind} {el.name} absorbs {float(p[0]):.4g} W: it is driven backwards; check the polarity of {el.name} "
                f"(first node positive) and of the batteries on its bus"
            )
        out.append(Series("wiring", f"{el.kind} {el.name} delivers", "W", SOURCE, np.where(bad, p, 0.0), 0.0, ~bad, quiet=True, detail=detail))
    # loads with no supply
    src_mask = np.zeros(bt.n_elements, dtype=bool)
    for kind_name, (pos, _cols) in bt.groups.items():
        if KINDS[kind_name].is_source:
            src_mask[pos] = True
    for el in elements_of(net, "load"):
        k = net.element_position(el.name)
        a, b = bt.a[k], bt.b[k]
        if a == b:
            continue
        idle = s.current(el.name) == 0
        if el.name in s.unsupplied:
            dead = True
        elif not idle.any():
            continue
        else:
            if s.single and s.state(el.name) == "dropped out":
                continue
            labels = _components(bt, k)
            if labels[a] != labels[b]:
                dead = True
            else:
                dead = not src_mask[(labels[bt.a] == labels[a]) & ~np.isin(np.arange(bt.n_elements), [k])].any()
        if not dead:
            continue
        detail = ""
        if s.single:
            free = [nd for nd in el.nodes if uses[net.node_index[nd]] == 1]
            why = f"node(s) {', '.join(free)} connect to nothing else" if free else "no source can drive current through it"
            detail = f"load {el.name} has no supply: {why}; it draws nothing." + hint(el.nodes)
        out.append(Series("wiring", f"load {el.name} supplied", "", SOURCE, np.nan, np.nan, np.zeros(s.n, dtype=bool), quiet=True, detail=detail))
    # conductors ending nowhere (only those touching a node used once are looked at)
    free_node = uses == 1
    free_node[net.node_index[net.ground]] = False
    ends = np.zeros(bt.n_elements, dtype=bool)
    for kind_name in _CONDUCTORS:
        if kind_name in bt.groups:
            pos = bt.groups[kind_name][0]
            ends[pos] = free_node[bt.a[pos]] | free_node[bt.b[pos]]
    ends &= bt.a != bt.b
    for k in np.flatnonzero(ends):
        el = net.elements[k]
        if el.kind == "switch" and el.values.get("state", "closed") == "open":
            continue
        free = [nd for nd in el.nodes if free_node[net.node_index[nd]]]
        detail = f"{el.kind} {el.name} ends at node(s) {', '.join(free)}, where nothing else connects." + hint(free) if s.single else ""
        out.append(Series("wiring", f"{el.kind} {el.name} connected", "", SOURCE, np.nan, np.nan, np.zeros(s.n, dtype=bool), quiet=True, detail=detail))
    # free terminals of cells and sources: not mistakes, but a likely misspelling is worth a word
    if s.single:
        for el in elements_of(net, "cell", "source", "supply"):
            for nd in el.nodes:
                near = spelling_suggestion(net, nd, uses)
                if near:
                    s.notes.append(f"{el.kind} {el.name}: node '{nd}' is used only by {el.name}; did you mean '{near}'?")
    return out
