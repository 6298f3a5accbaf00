"""Topology checks over the branch arrays, naming the culprits.

The connectivity test runs on arrays (``scipy.sparse.csgraph``) so that huge
networks do not pay for Python graph objects; a networkx graph is built only
for the few elements involved in a diagnosis, and on request for queries
(:func:`graph`).

Refused (``TopologyError``):

* floating islands - nodes with no path to ground through elements that tie
  potentials together (everything but current sources and open switches);
  an island joined to the rest only by current sources is reported as current
  sources without a return path. A part that only open switches and loads cross
  into is not refused: it is switched off on purpose (solved as idle), or the
  loads crossing into it have no supply (:func:`unsupplied`; they draw nothing
  and the wiring check fails them);
* loops made only of ideal sources and links (their currents are undetermined,
  and their EMFs may contradict each other).
"""

from __future__ import annotations

import numpy as np

from .analysis.branches import BranchTable
from .errors import TopologyError
from .netlist import Netlist

__all__ = ["check", "graph", "islands", "unsupplied", "one_edit_apart"]

_MAX_LISTED = 12


def _names(items, limit=_MAX_LISTED) -> str:
    items = list(items)
    text = ", ".join(items[:limit])
    if len(items) > limit:
        text += f" and {len(items) - limit} more"
    return text


def islands(bt: BranchTable) -> np.ndarray:
    """Connected-component label of every node over the connecting branches."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    m = bt.connecting
    n = bt.n_nodes
    adj = coo_matrix((np.ones(int(m.sum())), (bt.a[m], bt.b[m])), shape=(n, n))
    _, labels = connected_components(adj, directed=False)
    return labels


def check(net: Netlist, bt: BranchTable) -> list[str]:
    """Raise :class:`TopologyError` for unsolvable structures; return warnings."""
    warnings: list[str] = []
    _floating(net, bt)
    _ideal_loops(net, bt)
    self_loops = np.flatnonzero((bt.a == bt.b) & ~bt.is_voltage)
    if len(self_loops):
        warnings.append("element(s) with both terminals on one node carry no current: " + _names(bt.names[i] for i in self_loops))
    warnings += _duplicates(bt)
    warnings += _shorted(net, bt)
    warnings += _dangling(bt)
    return warnings


def _duplicates(bt: BranchTable) -> list[str]:
    if bt.shadow is None or not bt.shadow.any():
        return []
    out = []
    reps = np.unique(bt.representative[bt.shadow])
    for r in reps[:_MAX_LISTED]:
        members = np.flatnonzero(bt.representative == r)
        out.append(
            f"ideal elements {_names(bt.names[m] for m in members)} are in parallel with equal EMF: "
            f"how they share current is not determined by the circuit; each is shown carrying an equal share"
        )
    return out


def _shorted(net: Netlist, bt: BranchTable) -> list[str]:
    """Elements whose two terminals are joined by ideal zero-EMF connections (links, ideal fuses, closed switches)."""
    zero = np.flatnonzero(bt.is_voltage & (bt.e == 0) & (bt.a != bt.b))
    if len(zero) == 0:
        return []
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    n = bt.n_nodes
    adj = coo_matrix((np.ones(len(zero)), (bt.a[zero], bt.b[zero])), shape=(n, n))
    _, labels = connected_components(adj, directed=False)
    same = (labels[bt.a] == labels[bt.b]) & (bt.a != bt.b)
    same[zero] = False
    same &= ~(bt.is_voltage & (bt.e == 0))
    hits = np.flatnonzero(same)
    if len(hits) == 0:
        return []
    out = []
    sources = [bt.names[h] for h in hits if bt.is_voltage[h] or (bt.c[h] != 0 and bt.g[h] != 0)]
    passive = [bt.names[h] for h in hits if bt.names[h] not in sources]
    if sources:
        out.append(
            f"DANGER: {_names(sources)} short-circuited by an ideal link (both terminals joined with no resistance); "
            "a real short like this can drive a very large current"
        )
    if passive:
        out.append(f"element(s) {_names(passive)} are bridged by an ideal link and carry no current")
    return out


def _dangling(bt: BranchTable) -> list[str]:
    """Elements on dead ends (a chain that leads nowhere): they carry no current."""
    # anything that can carry current counts, current sources included (they are no
    # connection for potentials, but a constant-current load at the end of a feeder is no dead end)
    nonlinear = bt.nonlinear if bt.nonlinear is not None else False
    m = bt.connecting | (bt.c != 0) | nonlinear
    # an open switch or a blocked one-way element leaves what is behind it idle on purpose: it
    # counts as a connection here, so a charger behind an open switch is no dead end
    for kind_name in ("switch", "diode"):
        if kind_name in bt.groups:
            m[bt.groups[kind_name][0]] = True
    m &= bt.a != bt.b
    alive = m.copy()
    n = bt.n_nodes
    while True:
        deg = np.bincount(bt.a[alive], minlength=n) + np.bincount(bt.b[alive], minlength=n)
        leaf = deg == 1
        leaf[bt.ground] = False
        cut = alive & (leaf[bt.a] | leaf[bt.b])
        if not cut.any():
            break
        alive &= ~cut
    dead = np.flatnonzero(m & ~alive)
    if len(dead) == 0:
        return []
    return [f"element(s) {_names(bt.names[d] for d in dead)} lead nowhere (a dead end) and carry no current"]


def _open_crossing(net: Netlist, bt: BranchTable) -> np.ndarray:
    """Elements that may cross into a part of the network without tying potentials: open
    switches (held open on purpose) and loads (which, cut off, simply have no supply)."""
    ok = np.zeros(bt.n_elements, dtype=bool)
    for kind_name in ("switch", "load"):
        if kind_name in bt.groups:
            ok[bt.groups[kind_name][0]] = True
    return ok & ~bt.connecting


def unsupplied(net: Netlist, bt: BranchTable) -> np.ndarray:
    """Positions of the loads that cross into a part of the network with no path to ground:
    a current-drawing (or constant-power) load whose other terminal connects to nothing that
    could close its circuit. Such a load has no supply: it draws nothing, and the wiring check
    fails it (dcnet.checks.wiring)."""
    if "load" not in bt.groups:
        return np.zeros(0, dtype=np.int64)
    labels = islands(bt)
    gl = labels[bt.ground]
    pos = bt.groups["load"][0]
    crossing = (labels[bt.a[pos]] != labels[bt.b[pos]]) & ((labels[bt.a[pos]] != gl) | (labels[bt.b[pos]] != gl))
    return pos[crossing & ~bt.connecting[pos]]


def _floating(net: Netlist, bt: BranchTable) -> None:
    """Refuse parts with no path to ground, unless only open switches and loads cross into them
    (a part switched off on purpose, or a load with no supply: solved as idle, see
    dcnet.analysis.islands and dcnet.checks.wiring)."""
    labels = islands(bt)
    gl = labels[bt.ground]
    bad_all = labels != gl
    if not bad_all.any():
        return
    allowed = _open_crossing(net, bt)
    refused_labels = []
    for lab in np.unique(labels[bad_all]):
        inside = labels == lab
        cross = np.flatnonzero(inside[bt.a] != inside[bt.b])
        if len(cross) and allowed[cross].all():
            continue
        refused_labels.append(lab)
    if not refused_labels:
        return
    bad = np.isin(labels, refused_labels)
    floating_nodes = np.flatnonzero(bad)
    touching = np.flatnonzero(bad[bt.a] | bad[bt.b])
    names = [bt.names[i] for i in touching]
    nodes = [bt.node_names[i] for i in floating_nodes]
    current_only = ~bt.connecting
    crossing = [bt.names[i] for i in touching if current_only[i] and (bad[bt.a[i]] != bad[bt.b[i]]) and bt.c[i] != 0 and not allowed[i]]
    n_islands = len(refused_labels)
    if crossing:
        raise TopologyError(
            f"current source(s) {_names(crossing)} have no return path: the node(s) {_names(nodes)} "
            f"connect to the rest of the circuit only through current sources",
            culprits=tuple(crossing),
            node=nodes[0],
            element=crossing[0],
            hint="add a path for the current (a load or resistor) or use a voltage source",
        )
    what = "a floating part" if n_islands == 1 else f"{n_islands} floating parts"
    hint = "connect it to the rest of the circuit, or check for a misspelt node name"
    typo = _likely_typo(nodes, [bt.node_names[k] for k in np.flatnonzero(~bad)])
    if typo:
        hint = f"did you mean '{typo[1]}' where you wrote '{typo[0]}'? " + hint
    raise TopologyError(
        f"{what} with no path to ground '{net.ground}': node(s) {_names(nodes)}; element(s) {_names(names)}",
        culprits=tuple(names[:_MAX_LISTED]),
        node=nodes[0],
        hint=hint,
    )


def _likely_typo(floating: list[str], grounded: list[str]) -> tuple[str, str] | None:
    """A floating node whose name is close to a connected one (a misspelt node name)."""
    import difflib

    if len(grounded) > 5000:
        grounded = grounded[:5000]
    for name in floating[:50]:
        close = difflib.get_close_matches(name, grounded, n=1, cutoff=0.75)
        if close:
            return name, close[0]
    return None


def _ideal_loops(net: Netlist, bt: BranchTable) -> None:
    vb = np.flatnonzero(bt.solved_voltage)
    if len(vb) == 0:
        return
    for i in vb:
        if bt.a[i] == bt.b[i]:
            name = bt.names[i]
            what = "is shorted on itself" if bt.e[i] != 0 else "joins a node to itself"
            raise TopologyError(
                f"{net.element(name).kind} {name} {what} (both terminals on '{bt.node_names[bt.a[i]]}')",
                culprits=(name,),
                element=name,
                hint="an ideal source or link needs two different nodes",
            )
    # cycle test on arrays: a forest has edges = nodes - components
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    touched = np.unique(np.concatenate([bt.a[vb], bt.b[vb]]))
    local = np.searchsorted(touched, np.concatenate([bt.a[vb], bt.b[vb]]))
    k = len(vb)
    adj = coo_matrix((np.ones(k), (local[:k], local[k:])), shape=(len(touched), len(touched)))
    ncomp, _ = connected_components(adj, directed=False)
    if k <= len(touched) - ncomp:
        return
    loop = _find_loop(bt, vb)
    kinds = {net.element(n).kind for n in loop}
    emf_sum = _loop_emf(bt, loop)
    pos = {n: k for k, n in enumerate(bt.names)}
    with_emf = [n for n in loop if bt.e[pos[n]] != 0]
    if len(with_emf) == 1 and abs(emf_sum) > 0:
        others = [n for n in loop if n != with_emf[0]]
        raise TopologyError(
            f"ideal {net.element(with_emf[0]).kind} {with_emf[0]} is shorted by {_names(others)} "
            f"(no resistance anywhere in the loop, so the current would be unlimited)",
            culprits=tuple(loop),
            element=with_emf[0],
            hint="give the source an internal resistance r=, or the link a resistance r=",
        )
    detail = ""
    if abs(emf_sum) > 0:
        detail = f"; its EMFs do not add to zero around the loop ({emf_sum:+.6g} V), so they contradict each other"
    raise TopologyError(
        f"a loop made only of ideal {'/'.join(sorted(kinds))} elements: {' -> '.join(loop)}{detail}",
        culprits=tuple(loop),
        element=loop[0],
        hint="give one of them an internal resistance r= (cables, fuses and links with r= are not ideal)",
    )


def _find_loop(bt: BranchTable, vb: np.ndarray) -> list[str]:
    import networkx as nx

    forest = nx.Graph()
    for i in vb:
        u, w = int(bt.a[i]), int(bt.b[i])
        if forest.has_node(u) and forest.has_node(w) and nx.has_path(forest, u, w):
            path = nx.shortest_path(forest, u, w)
            names = [forest.edges[p, q]["name"] for p, q in zip(path, path[1:])]
            return names + [bt.names[i]]
        forest.add_edge(u, w, name=bt.names[i], index=int(i))
    return []  # pragma: no cover - only called when a loop exists


def _loop_emf(bt: BranchTable, loop: list[str]) -> float:
    """Sum of EMFs around the loop, signs following the walk; 0 when consistent."""
    pos = {n: i for i, n in enumerate(bt.names)}
    idx = [pos[n] for n in loop]
    # walk: orient each edge so that consecutive edges share nodes
    first = idx[0]
    start = int(bt.a[first])
    cur = start
    total = 0.0
    # begin at the node the first edge shares with the last edge
    last = idx[-1]
    if cur not in (int(bt.a[last]), int(bt.b[last])):
        cur = int(bt.b[first])
    for i in idx:
        if int(bt.b[i]) == cur:  # walking a <- b means we go from b to a: potential rises by e
            total += bt.e[i]
            cur = int(bt.a[i])
        else:
            total -= bt.e[i]
            cur = int(bt.b[i])
    return float(total)


def graph(net: Netlist):
    """A networkx MultiGraph of the netlist: nodes are node names, edges carry ``name`` and ``kind``."""
    import networkx as nx

    G = nx.MultiGraph()
    G.add_nodes_from(net.node_index)
    for el in net.elements:
        G.add_edge(el.nodes[0], el.nodes[1], key=el.name, name=el.name, kind=el.kind)
    return G


def one_edit_apart(a: str, b: str) -> bool:
    """True when ``b`` is ``a`` with one character inserted, deleted, replaced, or two
    neighbouring characters swapped (and the two differ)."""
    if a == b:
        return False
    la, lb = len(a), len(b)
    if abs(la - lb) > 1:
        return False
    if la == lb:
        diff = [k for k in range(la) if a[k] != b[k]]
        if len(diff) == 1:
            return True
        return len(diff) == 2 and diff[1] == diff[0] + 1 and a[diff[0]] == b[diff[1]] and a[diff[1]] == b[diff[0]]
    short, long_ = (a, b) if la < lb else (b, a)
    k = 0
    while k < len(short) and short[k] == long_[k]:
        k += 1
    return short[k:] == long_[k + 1 :]


def node_uses(net: Netlist) -> np.ndarray:
    """How many element terminals touch each node (a node used once is a free terminal)."""
    a, b, _ = net.indices()
    n = len(net.node_index)
    return np.bincount(np.asarray(a, dtype=np.int64), minlength=n) + np.bincount(np.asarray(b, dtype=np.int64), minlength=n)


def spelling_suggestion(net: Netlist, node: str, uses: np.ndarray | None = None) -> str | None:
    """For a node used only once: another node name one edit away from it (a likely misspelling)."""
    uses = node_uses(net) if uses is None else uses
    idx = net.node_index
    if node not in idx or uses[idx[node]] != 1:
        return None
    near = [other for other, k in idx.items() if other != node and uses[k] > 1 and one_edit_apart(node, other)]
    if not near:
        near = [other for other, k in idx.items() if other != node and one_edit_apart(node, other)]
    return near[0] if near else None
