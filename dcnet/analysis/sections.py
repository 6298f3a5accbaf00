"""Sections of a DC system: which sources feed each load, along which conductors.

This is the one definition of voltage drop that every check, study and report uses.

* **Conductors** are the elements that carry a pole from one place to another: cables,
  links, fuses, resistors, closed switches, and diodes while they conduct. Nodes joined by
  conductors form a *conductor group* (a bus bar and everything wired straight to it).
  Sources (cells, sources, supplies) and loads separate groups.
* A load's **feeding terminals** are the nearest source terminals along conductors: from the
  load's first node the nearest positive source terminal, from its second node the nearest
  negative one, "nearest" by the series resistance of the conductors in between (Dijkstra's
  shortest paths). A 12 V load on the mid point of a 24 V string is fed by the lower battery
  only; a load on a battery's terminals behind an isolator diode is fed by that battery, not
  through the diode; a load that can only be reached through a diode or a fuse has them on its
  path, and they are named. Where several terminals are equally near (parallel strings
  through equal fuses), each is kept and, per sample, the pair with the largest voltage gives the
  section (the larger drop: the conservative reading, and one that does not depend on the order
  of the file).
* The **section voltage** of a load is the voltage between its feeding terminals, and its
  **drop** is the section voltage less the load's own voltage: the voltage lost along the
  conductors of both poles (and any diode or fuse on them), as a share of the section voltage.
* A **cable's** ``drop_pct`` is its voltage as a share of the section voltage of the loads its
  conductor group feeds (the largest, where several); in a group that feeds no load, of the
  largest terminal voltage of the sources in the group; otherwise not defined (NaN).

Structures are found from the netlist once per set of conducting elements; evaluating them
takes only node potentials, one row per sample.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = ["Sections", "sections", "CONDUCTOR_KINDS"]

#: kinds that carry a pole along (a diode only while it conducts, a switch only when closed)
CONDUCTOR_KINDS = ("cable", "link", "fuse", "resistor", "switch", "diode")


@dataclass
class Feed:
    """How one load is fed: its feeding terminals and the conductors on the way."""

    plus: int | None  # node index of the nearest positive source terminal (None: none reached)
    minus: int | None
    plus_source: str | None  # the source element whose terminal it is
    minus_source: str | None
    path: list[int] = field(default_factory=list)  # element positions on both paths
    #: every equally near terminal of each pole (node, its source, the conductors to it); the
    #: first is ``plus``/``minus``
    plus_ties: list[tuple[int, str, list[int]]] = field(default_factory=list)
    minus_ties: list[tuple[int, str, list[int]]] = field(default_factory=list)

    def chosen(self, pot: np.ndarray) -> Feed:
        """The feed of one sample (potentials over nodes): the equally near terminals with the
        largest section voltage, and their paths."""
        if len(self.plus_ties) < 2 and len(self.minus_ties) < 2:
            return self
        tp = max(self.plus_ties, key=lambda t: pot[t[0]])
        tm = min(self.minus_ties, key=lambda t: pot[t[0]])
        return Feed(tp[0], tm[0], tp[1], tm[1], tp[2] + tm[2], [tp], [tm])


@dataclass
class Sections:
    labels: np.ndarray  # conductor group of every node
    feeds: dict[int, Feed]  # load position -> feed
    #: per conductor group: the (plus, minus) terminal pairs whose voltage is its section voltage
    group_pairs: dict[int, list[tuple[int, int]]]

    def section_voltage(self, pot: np.ndarray, load: int) -> np.ndarray:
        """Section voltage of a load for potentials ``pot`` (nodes, or samples x nodes); NaN if unfed."""
        f = self.feeds.get(load)
        pot = np.atleast_2d(pot)
        if f is None or f.plus is None or f.minus is None:
            return np.full(pot.shape[0], np.nan)
        if len(f.plus_ties) < 2 and len(f.minus_ties) < 2:
            return pot[:, f.plus] - pot[:, f.minus]
        plus = [t[0] for t in f.plus_ties] or [f.plus]
        minus = [t[0] for t in f.minus_ties] or [f.minus]
        return pot[:, plus].max(axis=1) - pot[:, minus].min(axis=1)

    def group_voltage(self, pot: np.ndarray, node: int) -> np.ndarray:
        """Section voltage of the conductor group of ``node`` (the largest of its pairs); NaN if none."""
        pot = np.atleast_2d(pot)
        pairs = self.group_pairs.get(int(self.labels[node]), [])
        if not pairs:
            return np.full(pot.shape[0], np.nan)
        p = np.array([a for a, _ in pairs])
        m = np.array([b for _, b in pairs])
        return np.abs(pot[:, p] - pot[:, m]).max(axis=1)


def _conducting(bt, conducting_diodes: np.ndarray | None) -> np.ndarray:
    mask = np.zeros(bt.n_elements, dtype=bool)
    for kind in CONDUCTOR_KINDS:
        if kind not in bt.groups:
            continue
        pos, cols = bt.groups[kind]
        if kind == "switch":
            mask[pos] = cols["closed"] != 0
        elif kind == "diode":
            mask[pos] = False if conducting_diodes is None else conducting_diodes[pos]
        else:
            mask[pos] = True
    return mask & (bt.a != bt.b)


def _resistance(bt, g: np.ndarray, is_voltage: np.ndarray, k: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore"):
        r = np.where(is_voltage[k] | (g[k] == 0), 0.0, 1.0 / np.abs(g[k]))
    return r + 1e-12 * (r.max(initial=0.0) + 1e-9)  # csgraph drops explicit zeros: keep every edge


def sections(net, bt, *, g: np.ndarray | None = None, is_voltage: np.ndarray | None = None, conducting_diodes: np.ndarray | None = None) -> Sections:
    """Conductor groups, each load's feeding terminals, and each group's section pairs.

    ``g``/``is_voltage`` are the solved model's (a conducting diode's resistance), defaulting to
    the branch table's; ``conducting_diodes`` marks the diodes that conduct (element mask).
    """
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components, dijkstra

    from ..kinds import KINDS

    g = bt.g if g is None else g
    is_voltage = bt.is_voltage if is_voltage is None else is_voltage
    n = bt.n_nodes
    cond = np.flatnonzero(_conducting(bt, conducting_diodes))
    adj = coo_matrix((np.ones(len(cond)), (bt.a[cond], bt.b[cond])), shape=(n, n))
    _, labels = connected_components(adj, directed=False)
    # source terminals: positive and negative, with the element they belong to
    plus_of: dict[int, str] = {}
    minus_of: dict[int, str] = {}
    src_pairs: list[tuple[int, int, int]] = []  # (plus node, minus node, position)
    for kind_name, (pos, _cols) in bt.groups.items():
        if not KINDS[kind_name].is_source:
            continue
        for p in pos:
            a, b = int(bt.a[p]), int(bt.b[p])
            if a == b:
                continue
            # a terminal shared by several sources is named by the first of their names
            plus_of[a] = min(plus_of.get(a, bt.names[p]), bt.names[p])
            minus_of[b] = min(minus_of.get(b, bt.names[p]), bt.names[p])
            src_pairs.append((a, b, int(p)))
    feeds: dict[int, Feed] = {}
    loads = bt.groups.get("load", (np.zeros(0, dtype=np.int64), {}))[0]
    loads = [int(p) for p in loads if bt.a[p] != bt.b[p]]
    if loads and (plus_of or minus_of):
        w = _resistance(bt, g, is_voltage, cond)
        lo = np.minimum(bt.a[cond], bt.b[cond]).astype(np.int64)
        hi = np.maximum(bt.a[cond], bt.b[cond]).astype(np.int64)
        # between two nodes keep the conductor of least resistance (coo -> csr would add them)
        order = np.lexsort((w, hi, lo))
        keep = np.ones(len(order), dtype=bool)
        keep[1:] = (lo[order][1:] != lo[order][:-1]) | (hi[order][1:] != hi[order][:-1])
        pick = order[keep]
        edge_key = lo[pick] * n + hi[pick]  # sorted (lexsort by lo, then hi)
        edge_el = cond[pick]

        def edge(u: int, w_: int) -> int:
            key = min(u, w_) * n + max(u, w_)
            return int(edge_el[int(np.searchsorted(edge_key, key))])

        W = coo_matrix((w[pick], (lo[pick], hi[pick])), shape=(n, n)).tocsr()
        starts = sorted({int(bt.a[p]) for p in loads} | {int(bt.b[p]) for p in loads})
        dist, pred = dijkstra(W, directed=False, indices=starts, return_predecessors=True)
        row = {s: k for k, s in enumerate(starts)}
        plus_nodes = np.array(sorted(plus_of), dtype=np.int64)
        minus_nodes = np.array(sorted(minus_of), dtype=np.int64)

        names = net.nodes

        def nearest(start: int, nodes: np.ndarray) -> list[int]:
            """The nearest terminals (all within 1e-9 of the least distance), by node name."""
            if not len(nodes):
                return []
            d = dist[row[start], nodes]
            best = float(d.min())
            if not np.isfinite(best):
                return []
            near = nodes[d <= best + 1e-9 * best + 1e-300]
            return sorted((int(x) for x in near), key=lambda x: names[x])

        def path(start: int, end: int) -> list[int]:
            out, node = [], end
            r = row[start]
            while node != start and node >= 0:
                prev = int(pred[r, node])
                if prev < 0:
                    break
                out.append(edge(prev, node))
                node = prev
            return out[::-1]

        for p in loads:
            a, b = int(bt.a[p]), int(bt.b[p])
            pt = [(x, plus_of[x], path(a, x)) for x in nearest(a, plus_nodes)]
            mt = [(x, minus_of[x], path(b, x)) for x in nearest(b, minus_nodes)]
            tp, tm = (pt[0] if pt else None), (mt[0] if mt else None)
            f = Feed(tp[0] if tp else None, tm[0] if tm else None, tp[1] if tp else None, tm[1] if tm else None, plus_ties=pt, minus_ties=mt)
            f.path = (tp[2] if tp else []) + (tm[2] if tm else [])
            feeds[p] = f
    group_pairs: dict[int, list[tuple[int, int]]] = {}
    for p, f in feeds.items():
        if f.plus is None or f.minus is None:
            continue
        for node in (bt.a[p], bt.b[p]):
            lab = int(labels[node])
            for x, _, _ in f.plus_ties:
                for y, _, _ in f.minus_ties:
                    if (x, y) not in group_pairs.setdefault(lab, []):
                        group_pairs[lab].append((x, y))
    fed = set(group_pairs)  # groups whose section a load's feed gives
    for a, b, _p in src_pairs:
        for node in (a, b):
            lab = int(labels[node])
            if lab not in fed and (a, b) not in group_pairs.setdefault(lab, []):
                group_pairs[lab].append((a, b))
    return Sections(labels, feeds, group_pairs)

