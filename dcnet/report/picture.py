"""The network picture: the solved circuit drawn as a graph, as SVG (written here) or PNG.

How the picture reads:

* **Height is potential.** Nodes are grouped into levels by their potential (nodes within 2 %
  of the circuit's voltage span share a level) and higher levels are drawn higher, so a
  resistive element's current runs downhill and a source lifts it. Within a level the nodes are
  spread by stress minimisation on graph distances (nodes close in the circuit sit close on
  the page), each free to move a little up or down inside its level's band.
* **Banks** (``Netlist.banks``) are drawn as a block: one column per string, the string's cells,
  straps, fuse and leads stacked from the negative bus (bottom) to the positive bus (top).
* **Each element** is a line between its nodes with a small badge of our own for its kind,
  labelled with its name and the magnitude of its current. The **arrow** points the way the
  current actually flows (the passive-sign current is positive from the element's first node to
  its second). **Line width** grows with the square root of the current's magnitude. **Colour**
  is the element's worst check verdict (see :data:`STATUS`).

:func:`scene` computes the drawing once as a list of primitives in pixels; :func:`svg` writes it
as a small self-contained SVG and :func:`write_png` renders the same primitives with matplotlib
(imported only there). The SVG carries the data a reader or a test needs: every element is a
``<g class="element">`` with ``data-name``, ``data-from``/``data-to`` (its first and second node),
``data-current`` (passive sign, A) and ``data-status``; its arrow is a ``<polygon
class="arrow">`` whose first point is the tip; every node is a ``<circle class="node"
data-node=...>``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from html import escape as _html_escape

import numpy as np

from ..display import shown
from .text import si


def escape(text: str, quote: bool = True) -> str:
    """HTML/XML text: markup escaped, control characters and bidi controls shown as visible escapes
    (they are not allowed in XML and would make the page read differently from what it holds)."""
    return _html_escape(shown(text), quote)

__all__ = ["STATUS", "MAX_NODES", "element_status", "layout", "scene", "svg", "write_png", "PictureTooLarge"]

#: status -> (colour, legend words). A scheme of our own: teal for comfortably within limits,
#: amber for close to a limit, vermilion for over one, slate for elements no check looks at.
STATUS = {
    "fail": ("#d1495b", "over a limit"),
    "close": ("#e09f1f", "within 10 % of a limit"),
    "pass": ("#1b8a84", "within limits"),
    "none": ("#7d8597", "no check applies"),
}
_RANK = {"none": 0, "pass": 1, "close": 2, "fail": 3}
#: a passing verdict at this share of its limit or closer counts as close
CLOSE = 0.9

#: the largest circuit drawn (a picture of more nodes is no longer readable on a page)
MAX_NODES = 400

_INK = "#22303c"
_MUTED = "#6b7682"
_FONT = "DejaVu Sans, Helvetica, Arial, sans-serif"


class PictureTooLarge(ValueError):
    """The circuit has more nodes than a readable picture can hold."""


# ---------------------------------------------------------------- verdicts
def element_status(sol) -> dict[str, tuple[str, list]]:
    """Each element's worst verdict category (``fail``, ``close``, ``pass``, ``none``) and the
    verdicts that name it (directly, as ``to load X``, as one of a list, or through its bank)."""
    net = sol.netlist
    names = set(net._by_name)
    banks = {b: info.get("prefix", b + ".") for b, info in net.banks.items()}
    bank_members: dict[str, list[str]] = {}
    for el in net.elements:
        for b, prefix in banks.items():
            if el.name.startswith(prefix):
                bank_members.setdefault(b, []).append(el.name)
    out: dict[str, tuple[str, list]] = {el.name: ("none", []) for el in net.elements}
    for v in sol.verdicts:
        if v.sense == "info":
            continue
        subject = v.subject
        targets: list[str] = []
        if subject in names:
            targets = [subject]
        elif subject.startswith("to load ") and subject[8:] in names:
            targets = [subject[8:]]
        elif subject.startswith("bank ") and subject[5:] in bank_members:
            # a bank-wide verdict (imbalance) colours the bank's cells
            targets = [n for n in bank_members[subject[5:]] if net.element(n).kind == "cell"]
        elif ", " in subject:
            targets = [s for s in subject.split(", ") if s in names]
        if not targets:
            continue
        cat = "fail" if not v.ok else ("close" if v.margin >= CLOSE else "pass")
        for t in targets:
            old, vs = out[t]
            out[t] = (cat if _RANK[cat] > _RANK[old] else old, vs + [v])
    return out


# ------------------------------------------------------------------ layout
_STEP = {"link": 0.45, "cable": 0.8, "switch": 0.8, "fuse": 0.8}


def _step(kind: str) -> float:
    return _STEP.get(kind, 1.0)


def _room(el) -> float:
    """Room an element needs along a level: its step, or its label ("NAME  12.3 A") above it."""
    return max(0.62 * _step(el.kind), 0.6 * 10.5 * (len(el.name) + 9) / _SX)


@dataclass
class Layout:
    """Node positions (layout units, y up), where each element's line starts and ends, bus bars
    where parallel branches meet a node, and the bank blocks."""

    pos: dict[str, tuple[float, float]]
    ends: dict[str, tuple[tuple[float, float], tuple[float, float]]] = field(default_factory=dict)
    bars: dict[str, tuple[float, float, float]] = field(default_factory=dict)  # node -> (x0, x1, y)
    banks: list[dict] = field(default_factory=list)
    bank_nodes: set[str] = field(default_factory=set)
    bank_elements: dict[str, str] = field(default_factory=dict)  # element -> short label inside its bank
    quiet: set[str] = field(default_factory=set)  # nodes drawn without their name (inside columns)
    wires: dict[str, list] = field(default_factory=dict)  # node -> polylines of plain wire round a bank


def _bank_chains(net, sol):
    """For each bank: its strings as chains [start node, (element, node), ...] from the negative end."""
    chains = {}
    for bname, info in net.banks.items():
        prefix = info.get("prefix", bname + ".")
        strings = []
        for j in range(1, len(info["strings"]) + 1):
            sp = f"{prefix}s{j}."
            els = [el for el in net.elements if el.name.startswith(sp)]
            adj: dict[str, list] = {}
            for el in els:
                a, b = el.nodes
                adj.setdefault(a, []).append((b, el))
                adj.setdefault(b, []).append((a, el))
            ends = [n for n, lst in adj.items() if len(lst) == 1]
            if len(ends) != 2 or any(len(lst) > 2 for lst in adj.values()):
                return None  # not a simple chain: draw the bank like any other part
            start = min(ends, key=sol.potential)
            seq, seen, node = [start], set(), start
            while True:
                nxt = [(m, el) for m, el in adj[node] if el.name not in seen]
                if not nxt:
                    break
                m, el = nxt[0]
                seen.add(el.name)
                seq.append((el, m))
                node = m
            strings.append(seq)
        chains[bname] = strings
    return chains


def _chains(net, skeleton: set[str], phi):
    """Split the circuit into chains: runs of elements whose inner nodes join exactly two
    elements, from one skeleton node to another. Promotes nodes to the skeleton until every
    chain has two different ends."""
    adj: dict[str, list[tuple[int, str]]] = {}
    for k, el in enumerate(net.elements):
        a, b = el.nodes
        if a == b:
            continue
        adj.setdefault(a, []).append((k, b))
        adj.setdefault(b, []).append((k, a))
    skeleton = set(skeleton) | {nd for nd, lst in adj.items() if len(lst) != 2}
    while True:
        used: set[int] = set()
        chains = []
        for s in sorted(skeleton, key=lambda nd: net.node_index[nd]):
            for k, m in adj.get(s, ()):
                if k in used:
                    continue
                used.add(k)
                els, inner, node = [k], [], m
                while node not in skeleton:
                    inner.append(node)
                    k2, nxt = next((kk, mm) for kk, mm in adj[node] if kk not in used)
                    used.add(k2)
                    els.append(k2)
                    node = nxt
                chains.append((s, els, inner, node))
        rest = [
            k
            for k in range(len(net.elements))
            if k not in used and net.elements[k].nodes[0] != net.elements[k].nodes[1]
        ]
        if rest:  # a loop of two-element nodes only: anchor it at its highest and lowest node
            loop_nodes = {nd for k in rest for nd in net.elements[k].nodes}
            skeleton |= {max(loop_nodes, key=lambda nd: phi[nd]), min(loop_nodes, key=lambda nd: phi[nd])}
            continue
        closed = [c for c in chains if c[0] == c[3] and c[2]]
        if closed:
            for a, _els, inner, _b in closed:
                skeleton.add(max(inner, key=lambda nd: abs(phi[nd] - phi[a])))
            continue
        return chains, skeleton


def layout(sol) -> Layout:
    """Positions for every node: levels by potential, banks as blocks, chains as straight runs
    (parallel ones side by side), stress majorisation for the rest."""
    net = sol.netlist
    nodes = list(net.node_index)
    n = len(nodes)
    if n > MAX_NODES:
        raise PictureTooLarge(f"the circuit has {n:,} nodes; the picture is drawn for up to {MAX_NODES}")
    index = {nd: k for k, nd in enumerate(nodes)}
    phi = {nd: sol.potential(nd) for nd in nodes}
    bank_chains = _bank_chains(net, sol) or {}

    # bank blocks: columns of strings; their nodes are held in place relative to the block
    bank_nodes: set[str] = set()
    bank_elements: dict[str, str] = {}
    fixed_x: dict[str, float] = {}
    rel_y: dict[str, tuple[str, str, float]] = {}
    blocks = []
    x0, dx = 0.0, 1.25
    for bname, strings in bank_chains.items():
        info = net.banks[bname]
        prefix = info.get("prefix", bname + ".")
        heights = []
        for j, seq in enumerate(strings):
            x = x0 + j * dx
            steps = [0.0]
            for el, _m in seq[1:]:
                steps.append(steps[-1] + (0.45 if el.kind == "link" else 1.0))
            total = steps[-1] or 1.0
            heights.append(total)
            bottom, top = seq[0], seq[-1][1]
            for k, node in enumerate([seq[0]] + [m for _el, m in seq[1:]]):
                fixed_x.setdefault(node, x)
                if node not in (bottom, top):
                    rel_y[node] = (bottom, top, steps[k] / total)
                bank_nodes.add(node)
            for el, _m in seq[1:]:
                bank_elements[el.name] = el.name[len(f"{prefix}s{j + 1}.") :]
        for el in net.elements:
            if el.name.startswith(prefix) and el.name not in bank_elements:
                bank_elements[el.name] = el.name[len(prefix) :]
        blocks.append(
            {
                "name": bname,
                "x0": x0,
                "x1": x0 + (len(strings) - 1) * dx,
                "strings": len(strings),
                "info": info,
                "height": max(heights),
            }
        )
        x0 += len(strings) * dx + 1.5

    chains, skeleton = _chains(net, bank_nodes, phi)
    inner_nodes = {nd for c in chains for nd in c[2]}

    # levels by potential for the skeleton (bank interiors excepted)
    span = (max(phi.values()) - min(phi.values())) if n else 0.0
    tol = max(0.02 * span, 1e-9)
    outer = sorted((nd for nd in nodes if nd not in rel_y and nd not in inner_nodes), key=lambda nd: phi[nd])
    level_of: dict[str, int] = {}
    lvl, last = -1, None
    for nd in outer:
        if last is None or phi[nd] - last > tol:
            lvl += 1
        level_of[nd] = lvl
        last = phi[nd]
    n_levels = lvl + 1
    gaps = np.full(max(n_levels - 1, 0), 2.0)

    def stretch(lo, hi, need):
        if hi > lo and gaps[lo:hi].sum() < need:
            gaps[lo:hi] *= need / gaps[lo:hi].sum()

    for blk in blocks:
        seqs = bank_chains[blk["name"]]
        stretch(min(level_of[q[0]] for q in seqs), max(level_of[q[-1][1]] for q in seqs), blk["height"] * 0.62)
    for a, els, _inner, b in chains:
        if a not in level_of or b not in level_of:
            continue  # inside a bank block
        la, lb = sorted((level_of[a], level_of[b]))
        stretch(la, lb, 0.95 * sum(_step(net.elements[k].kind) for k in els))
    level_y = np.concatenate([[0.0], np.cumsum(gaps)]) if n_levels else np.zeros(0)

    # parallel chains between the same two skeleton nodes go side by side: sources first, then
    # cells, then the rest, in file order
    def rank(c):
        kinds = {net.elements[k].kind for k in c[1]}
        return (0 if kinds & {"source", "supply"} else 1 if "cell" in kinds else 2, min(c[1]))

    groups: dict[frozenset, list] = {}
    for c in chains:
        if c[0] != c[3]:
            groups.setdefault(frozenset((c[0], c[3])), []).append(c)
    placed = []  # (low end, high end, elements low->high, inner nodes low->high, offset, vertical)
    for grp in groups.values():
        grp.sort(key=rank)
        m = len(grp)
        for k, (a, els, inner, b) in enumerate(grp):
            if a not in level_of or b not in level_of:
                placed.append((a, b, els, inner, 0.0, False))
                continue
            vertical = level_of[a] != level_of[b]
            if vertical and level_of[a] > level_of[b] or (not vertical and net.node_index[a] > net.node_index[b]):
                a, b, els, inner = b, a, els[::-1], inner[::-1]
            off = (k - (m - 1) / 2) * (1.15 if vertical else 0.6)
            if not inner and not vertical:
                off = 0.0  # single parallel elements on one level are bent instead
            placed.append((a, b, els, inner, off, vertical))

    y = np.zeros(n)
    band_lo, band_hi = np.zeros(n), np.zeros(n)
    for nd, lv in level_of.items():
        k = index[nd]
        y[k] = level_y[lv]
        if nd in fixed_x:
            continue
        if lv > 0:
            band_lo[k] = 0.22 * gaps[lv - 1]
        if lv < n_levels - 1:
            band_hi[k] = 0.22 * gaps[lv]

    # where each inner node sits along its chain (steps, blended with potential when vertical)
    along = []
    for a, b, els, inner, off, vertical in placed:
        steps = np.cumsum([_step(net.elements[k].kind) for k in els])
        f = steps[:-1] / steps[-1]
        dphi = phi[b] - phi[a]
        if vertical and abs(dphi) > tol:
            g = np.clip([(phi[nd] - phi[a]) / dphi for nd in inner], 0, 1)
            fy = 0.7 * f + 0.3 * np.maximum.accumulate(g) if len(inner) else f
        else:
            fy = f
        along.append(([index[nd] for nd in inner], index[a], index[b], f, fy, off, vertical))

    def project(x, yy):
        for ids, ia, ib, f, fy, off, vertical in along:
            if not ids:
                continue
            if vertical:
                x[ids] = x[ia] + (x[ib] - x[ia]) * f + off
                yy[ids] = yy[ia] + (yy[ib] - yy[ia]) * fy
            else:
                x[ids] = x[ia] + (x[ib] - x[ia]) * f
                yy[ids] = yy[ia] + (yy[ib] - yy[ia]) * f + off
        for nd, (bot, top, f) in rel_y.items():
            yy[index[nd]] = yy[index[bot]] + f * (yy[index[top]] - yy[index[bot]])

    held = np.array([nd in fixed_x for nd in nodes])
    derived = np.array([nd in inner_nodes or nd in rel_y for nd in nodes])
    x_fixed = np.array([fixed_x.get(nd, 0.0) for nd in nodes])
    keep_out = [(blk["x0"] - 1.3, blk["x1"] + 1.3) for blk in blocks]
    upright = [(index[a], index[b]) for a, b, els, inner, off, vertical in placed if vertical]
    # a node whose parallel runs spread sideways keeps them all outside a bank's frame
    reach = np.zeros(n)
    for a, b, els, inner, off, vertical in placed:
        if vertical and off:
            for nd in (a, b):
                reach[index[nd]] = max(reach[index[nd]], abs(off))
    spans = [
        (
            index[a],
            index[b],
            sum(_room(net.elements[k]) for k in els) + reach[index[a]] + reach[index[b]],
        )
        for a, b, els, inner, off, vertical in placed
        if not vertical and a in level_of and b in level_of
    ]
    # nodes on one level whose bars spread sideways keep their bars apart
    by_level: dict[int, list[int]] = {}
    for nd, lv in level_of.items():
        by_level.setdefault(lv, []).append(index[nd])
    apart = [
        (i, j, reach[i] + reach[j] + 0.6)
        for ids in by_level.values()
        for u, i in enumerate(ids)
        for j in ids[u + 1 :]
        if reach[i] + reach[j] > 0
    ]
    frames = [
        np.array([index[nd] for nd in bank_nodes if nd in fixed_x and blk["x0"] <= fixed_x[nd] <= blk["x1"]])
        for blk in blocks
    ]
    outside = np.array([el.name not in bank_elements for el in net.elements], dtype=bool)
    x, y = _stress(
        net, index, y, band_lo, band_hi, held, derived, x_fixed, project, keep_out, upright, spans + apart, reach,
        frames=(frames, outside),
    )
    pos = {nd: (float(x[index[nd]]), float(y[index[nd]])) for nd in nodes}

    rails = _upright(placed, pos, bank_nodes)

    # element ends: parallel vertical runs meet their end nodes on a bus bar
    ends: dict[str, tuple] = {}
    attach: dict[str, list[float]] = {}
    for idx, (a, b, els, inner, off, vertical) in enumerate(placed):
        seq = [a] + inner + [b]
        xc = rails.get(idx)  # the x of a run stood upright
        for j, k in enumerate(els):
            el = net.elements[k]
            p, q = seq[j], seq[j + 1]
            pp, pq = pos[p], pos[q]
            if vertical and (off or xc is not None) and j == 0:
                pp = ((pp[0] if xc is None else xc) + off, pp[1])
                if abs(pp[0] - pos[p][0]) > 1e-9:
                    attach.setdefault(p, []).append(pp[0])
            if vertical and (off or xc is not None) and j == len(els) - 1:
                pq = ((pq[0] if xc is None else xc) + off, pq[1])
                if abs(pq[0] - pos[q][0]) > 1e-9:
                    attach.setdefault(q, []).append(pq[0])
            ends[el.name] = (pp, pq) if el.nodes == (p, q) else (pq, pp)
    for el in net.elements:
        if el.name not in ends:
            ends[el.name] = (pos[el.nodes[0]], pos[el.nodes[1]])
    bars = {}
    for nd, xs in attach.items():
        xs = xs + [pos[nd][0]]
        bars[nd] = (min(xs), max(xs), pos[nd][1])
    # a run along a level between nodes with bars starts and ends at the bars' facing ends, so
    # it never lies along a bar (where the branches hanging from that bar would seem to join it)
    for a, b, els, inner, off, vertical in placed:
        if vertical or (a not in bars and b not in bars) or abs(pos[a][1] - pos[b][1]) > 1e-6:
            continue
        if a in bank_nodes or b in bank_nodes:
            continue
        y0 = pos[a][1]
        sa, sb = (1.0, -1.0) if pos[a][0] <= pos[b][0] else (-1.0, 1.0)  # which end of each bar faces
        xa = (bars[a][1] if sa > 0 else bars[a][0]) if a in bars else pos[a][0]
        xb = (bars[b][0] if sb < 0 else bars[b][1]) if b in bars else pos[b][0]
        if (xb - xa) * sa < 0.3:
            continue  # no room between the bars: left as drawn
        steps = np.cumsum([_step(net.elements[k].kind) for k in els])
        pts = [(xa, y0)] + [(xa + (xb - xa) * t, y0) for t in steps[:-1] / steps[-1]] + [(xb, y0)]
        for nd, q in zip(inner, pts[1:-1]):
            pos[nd] = (float(q[0]), y0)
        seq = [a] + inner + [b]
        for j, k in enumerate(els):
            el = net.elements[k]
            ends[el.name] = (pts[j], pts[j + 1]) if el.nodes == (seq[j], seq[j + 1]) else (pts[j + 1], pts[j])
    for blk in blocks:
        seqs = bank_chains[blk["name"]]
        blk["y0"] = min(pos[q[0]][1] for q in seqs)
        blk["y1"] = max(pos[q[-1][1]][1] for q in seqs)
    quiet = {nd for a, b, els, inner, off, vertical in placed if vertical and off for nd in inner}
    wires = _round_banks(net, placed, blocks, pos, ends, bank_nodes, bank_elements)
    return Layout(pos, ends, bars, blocks, bank_nodes, bank_elements, quiet, wires)


#: layout units: how far outside a bank frame the wires that go round it run
_ABOVE, _BELOW, _RIGHT, _LEFT, _LANE = 0.85, 0.55, 1.6, 0.95, 0.9


def _upright(placed, pos, bank_nodes) -> dict[int, float]:
    """Stand slanted vertical runs upright where that is safe.

    A run between nodes at different x is drawn straight up at the x of the end with fewer
    vertical runs, and the other end (a rail, such as a negative bus) reaches it with its bar,
    unless the run would then pass a node or bar of another node, overlap a run already standing
    there, or the rail's bar would run into another node's bar on its level. Moves the inner
    nodes of the runs it stands up; returns run index -> its x (before its parallel offset)."""
    n_vertical: dict[str, int] = {}
    for a, b, _els, _inner, _off, vertical in placed:
        if vertical:
            n_vertical[a] = n_vertical.get(a, 0) + 1
            n_vertical[b] = n_vertical.get(b, 0) + 1
    span = {nd: [x, x] for nd, (x, _y) in pos.items()}  # each node's bar as it grows
    columns = []  # (x, y low, y high) of the runs drawn upright
    for a, b, _els, inner, off, vertical in placed:
        if vertical and off:
            for nd in (a, b):
                span[nd][0] = min(span[nd][0], pos[nd][0] + off)
                span[nd][1] = max(span[nd][1], pos[nd][0] + off)
        if vertical and abs(pos[a][0] - pos[b][0]) < 1e-6:
            ys = sorted((pos[a][1], pos[b][1]))
            columns.append((pos[a][0] + off, ys[0], ys[1]))
    out: dict[int, float] = {}
    for _pass in range(3):  # a run stood upright moves its inner nodes out of another's way
        before = len(out)
        _upright_pass(placed, pos, bank_nodes, n_vertical, span, columns, out)
        if len(out) == before:
            break
    return out


def _upright_pass(placed, pos, bank_nodes, n_vertical, span, columns, out):
    for idx, (a, b, _els, inner, off, vertical) in enumerate(placed):
        if idx in out or not vertical or a in bank_nodes or b in bank_nodes or abs(pos[a][0] - pos[b][0]) < 1e-6:
            continue
        rail, other = (a, b) if (n_vertical[a], -pos[a][1]) > (n_vertical[b], -pos[b][1]) else (b, a)
        ylo, yhi = sorted((pos[a][1], pos[b][1]))
        # straight under the upper end if there is room; else a little beside it, that end's
        # bar reaching over
        for shift in (0.0, 0.6, -0.6, 1.2, -1.2):
            x = pos[other][0] + off + shift
            grow = [rail] + ([other] if shift else [])
            if _fits(x, (a, b), grow, inner, pos, span, columns, ylo, yhi):
                break
        else:
            continue
        for nd in inner:
            pos[nd] = (x, pos[nd][1])
            span[nd] = [x, x]
        for nd in grow:
            span[nd][0], span[nd][1] = min(span[nd][0], x), max(span[nd][1], x)
        columns.append((x, ylo, yhi))
        out[idx] = x - off


def _fits(x, ends, grow, inner, pos, span, columns, ylo, yhi) -> bool:
    """May a vertical run stand at x from ylo to yhi, the bars of the nodes in ``grow`` reaching
    it? Not if it passes another node or its bar, overlaps a run already standing there, or a
    grown bar would reach another node's bar on its level or cross a run passing that level."""
    levels = {nd: pos[nd][1] for nd in grow}
    for nd, (_nx, ny) in pos.items():
        if nd in ends or nd in inner:
            continue
        if ylo - 1e-6 < ny < yhi + 1e-6 and all(abs(ny - y) > 1e-6 for y in levels.values()):
            if span[nd][0] - 0.2 < x < span[nd][1] + 0.2:
                return False
        for g, y in levels.items():
            if abs(ny - y) <= 1e-6:
                lo, hi = min(span[g][0], x), max(span[g][1], x)
                if lo - 0.2 < span[nd][1] and span[nd][0] < hi + 0.2:
                    return False
    for cx, cl, ch in columns:
        if abs(cx - x) < 0.3 and cl < yhi and ylo < ch:
            return False
        for g, y in levels.items():
            lo, hi = min(span[g][0], x), max(span[g][1], x)
            if cl + 1e-6 < y < ch - 1e-6 and lo - 0.05 < cx < hi + 0.05:
                return False
    return True


def _round_banks(net, placed, blocks, pos, ends, bank_nodes, bank_elements):
    """Chains outside a bank that would be drawn across its frame (the leads of a bank tapped
    at opposite ends, a load between its own terminals) go round it instead: a wire leaves
    the bank node straight up (top row) or down (bottom row) to a lane outside the frame and
    runs along it to a column beside the bank, where the chain's elements are drawn.
    Moves the chains' inner nodes and element ends; returns node -> polylines (layout units)."""
    wires: dict[str, list] = {}
    lanes: dict[tuple[int, str], int] = {}

    def block_of(nd):
        if nd not in bank_nodes:
            return None
        x, y = pos[nd]
        for k, blk in enumerate(blocks):
            if blk["x0"] - 1e-6 <= x <= blk["x1"] + 1e-6 and blk["y0"] - 1e-6 <= y <= blk["y1"] + 1e-6:
                return k
        return None

    for a, b, els, inner, _off, _vertical in placed:
        if any(net.elements[k].name in bank_elements for k in els):
            continue
        ka, kb = block_of(a), block_of(b)
        k = ka if ka is not None else kb
        if k is None or (ka is not None and kb is not None and ka != kb):
            continue
        blk = blocks[k]
        if not any(_segment_in_frame(*ends[net.elements[j].name], blk) for j in els):
            continue
        rows = []  # each end: "top" or "bottom" row of the block, "mid" (inside it), None (outside)
        for nd in (a, b):
            y = pos[nd][1]
            if block_of(nd) != k:
                rows.append(None)
            else:
                rows.append("top" if abs(y - blk["y1"]) < 1e-6 else "bottom" if abs(y - blk["y0"]) < 1e-6 else "mid")
        ra, rb = rows
        if "mid" in (ra, rb):
            continue  # a lead to a string's middle: left as drawn
        lane_y = {"top": blk["y1"] + _ABOVE, "bottom": blk["y0"] - _BELOW}
        outside = [nd for nd, r in ((a, ra), (b, rb)) if r is None]
        if ra and rb and ra == rb:  # both on one row: run along its lane
            col = None
        else:
            if outside:
                side = "right" if pos[outside[0]][0] > (blk["x0"] + blk["x1"]) / 2 else "left"
            else:  # the nearer side (tap at the same end), else the emptier one
                centre, half = (blk["x0"] + blk["x1"]) / 2, (blk["x1"] - blk["x0"]) / 2
                lean = (pos[a][0] + pos[b][0]) / 2 - centre
                others = [xy[0] for nd, xy in pos.items() if nd not in bank_nodes and nd not in inner]
                n_left = sum(x < blk["x0"] for x in others)
                n_right = sum(x > blk["x1"] for x in others)
                if abs(lean) > 0.25 * half:
                    side = "left" if lean < 0 else "right"
                else:
                    side = "left" if n_left < n_right else "right"
            used = lanes.get((k, side), 0)
            lanes[(k, side)] = used + 1
            col = blk["x1"] + _RIGHT + used * _LANE if side == "right" else blk["x0"] - _LEFT - used * _LANE

        ports = []  # where the chain's elements start and end: the node, or the end of its wire
        for nd, r in ((a, ra), (b, rb)):
            if r is None:
                ports.append(pos[nd])
                continue
            x, y = pos[nd]
            line = [(x, y), (x, lane_y[r])] + ([(col, lane_y[r])] if col is not None else [])
            wires.setdefault(nd, []).append(line)
            ports.append(line[-1])
        pa, pb = ports
        steps = np.cumsum([_step(net.elements[j].kind) for j in els])
        f = steps / steps[-1]
        pts = [pa] + [(pa[0] + (pb[0] - pa[0]) * t, pa[1] + (pb[1] - pa[1]) * t) for t in f[:-1]] + [pb]
        for nd, xy in zip(inner, pts[1:-1]):
            pos[nd] = (float(xy[0]), float(xy[1]))
        seq = [a] + inner + [b]
        for j, kk in enumerate(els):
            el = net.elements[kk]
            p, q = pts[j], pts[j + 1]
            ends[el.name] = (p, q) if el.nodes == (seq[j], seq[j + 1]) else (q, p)
    return wires


def _stress(
    net,
    index,
    y0,
    band_lo,
    band_hi,
    held,
    derived,
    x_fixed,
    project,
    keep_out=(),
    upright=(),
    spans=(),
    reach=None,
    frames=None,
    iterations: int = 240,
):
    """Stress majorisation: x free (held nodes stay, derived ones follow their chain), y inside
    each node's band; a few seeded starts, the one with the fewest crossings kept."""
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import shortest_path

    n = len(index)
    if n == 0:
        return np.zeros(0), y0
    reach = np.zeros(n) if reach is None else reach
    a = np.array([index[el.nodes[0]] for el in net.elements])
    b = np.array([index[el.nodes[1]] for el in net.elements])
    wts = np.array([_step(el.kind) for el in net.elements])
    adj = coo_matrix((wts, (a, b)), shape=(n, n)).tocsr()
    d = shortest_path(adj, directed=False)
    finite = np.isfinite(d)
    d[~finite] = (d[finite].max() if finite.any() else 1.0) + 1.0
    d = np.maximum(d * 1.2, 0.0)
    np.fill_diagonal(d, 0.0)
    w = np.zeros_like(d)
    off = d > 0
    w[off] = d[off] ** -2
    for ia, ib in upright:  # the two ends of a vertical run: one above the other
        dv = max(abs(y0[ia] - y0[ib]), 0.1)
        d[ia, ib] = d[ib, ia] = dv
        w[ia, ib] = w[ib, ia] = 6.0 / dv**2
    wsum = w.sum(axis=1)
    wsum[wsum == 0] = 1.0
    lo, hi = y0 - band_lo, y0 + band_hi
    movable_y = ((band_lo > 0) | (band_hi > 0)) & ~derived
    free = ~held & ~derived
    attempts = 1 if free.sum() <= 1 else (16 if n <= 40 else 6 if n <= 160 else 2)
    rng = np.random.default_rng(7)
    centre = x_fixed[held].mean() if held.any() else 0.0
    best = None
    for _attempt in range(attempts):
        x = np.where(held, x_fixed, centre + rng.normal(0.0, max(1.0, math.sqrt(n)), n))
        yy = y0.copy()
        project(x, yy)
        for _ in range(iterations):
            dxm = x[:, None] - x[None, :]
            dym = yy[:, None] - yy[None, :]
            dist = np.sqrt(dxm * dxm + dym * dym)
            dist[dist < 1e-9] = 1e-9
            ratio = d / dist
            nx = (w * (x[None, :] + ratio * dxm)).sum(axis=1) / wsum
            ny = (w * (yy[None, :] + ratio * dym)).sum(axis=1) / wsum
            x = np.where(free, nx, x)
            for ia, ib in upright:  # hold vertical runs upright
                if free[ia] and free[ib]:
                    x[ia] = x[ib] = 0.5 * (x[ia] + x[ib])
                elif free[ia]:
                    x[ia] = x[ib]
                elif free[ib]:
                    x[ib] = x[ia]
            for ia, ib, length in spans:  # a run along a level gets room for its elements
                gap = x[ib] - x[ia]
                if abs(gap) < length:
                    sign = 1.0 if gap >= 0 else -1.0
                    push = (length - abs(gap)) * sign
                    if free[ia] and free[ib]:
                        x[ia] -= push / 2
                        x[ib] += push / 2
                    elif free[ib]:
                        x[ib] += push
                    elif free[ia]:
                        x[ia] -= push
            for xa, xb in keep_out:  # nothing outside a bank inside its frame
                lo_x, hi_x = xa - reach, xb + reach
                inside = free & (x > lo_x) & (x < hi_x)
                x = np.where(inside, np.where(x - lo_x < hi_x - x, lo_x, hi_x), x)
            yy = np.where(movable_y, np.clip(ny, lo, hi), yy)
            project(x, yy)
        dist = np.sqrt((x[:, None] - x[None, :]) ** 2 + (yy[:, None] - yy[None, :]) ** 2)
        stress = float((w * (dist - d) ** 2).sum())
        key = (_crossings(x, yy, a, b) + 10 * _through_frames(x, yy, a, b, frames), stress)
        if best is None or key < best[0]:
            best = (key, x.copy(), yy.copy())
    _, x, yy = best
    if not held.any():
        x = x - x.min()
    return x, yy


def _segment_in_frame(pa, pb, blk) -> bool:
    """Does the straight line from pa to pb pass through a bank's block (sampled)?"""
    t = np.linspace(0.05, 0.95, 19)
    xs, ys = pa[0] + (pb[0] - pa[0]) * t, pa[1] + (pb[1] - pa[1]) * t
    return bool(_in_frame(xs, ys, blk["x0"], blk["x1"], blk["y0"], blk["y1"]).any())


def _in_frame(x, y, x0, x1, y0, y1):
    """Inside a bank's block: between its outer strings and from its bottom row to its top
    row, both rows included (a line along a row would lie on the bank's bus)."""
    return (x > x0 - 0.05) & (x < x1 + 0.05) & (y > y0 - 0.1) & (y < y1 + 0.1)


def _through_frames(x, y, a, b, frames) -> int:
    """Elements outside the banks whose straight line passes through a bank's frame."""
    if not frames or not len(frames[0]):
        return 0
    blocks, outside = frames
    count = 0
    t = np.linspace(0.05, 0.95, 19)[:, None]
    for ids in blocks:
        if not len(ids):
            continue
        x0, x1, y0, y1 = x[ids].min(), x[ids].max(), y[ids].min(), y[ids].max()
        xs = x[a[outside]] + (x[b[outside]] - x[a[outside]]) * t
        ys = y[a[outside]] + (y[b[outside]] - y[a[outside]]) * t
        inside = _in_frame(xs, ys, x0, x1, y0, y1)
        count += int(inside.any(axis=0).sum())
    return count


def _crossings(x, y, a, b) -> int:
    """Edges that cross, plus nodes lying on an edge they do not belong to (weighted double)."""
    keep = a != b
    a, b = a[keep], b[keep]
    if len(a) < 2 or len(a) > 1500:
        return 0
    p, q = np.stack([x[a], y[a]], 1), np.stack([x[b], y[b]], 1)

    def orient(p1, p2, p3):
        return np.sign(
            (p2[..., 0] - p1[..., 0]) * (p3[..., 1] - p1[..., 1])
            - (p2[..., 1] - p1[..., 1]) * (p3[..., 0] - p1[..., 0])
        )

    P1, P2 = p[:, None, :], q[:, None, :]
    Q1, Q2 = p[None, :, :], q[None, :, :]
    o1, o2 = orient(P1, P2, Q1), orient(P1, P2, Q2)
    o3, o4 = orient(Q1, Q2, P1), orient(Q1, Q2, P2)
    shared = (
        (a[:, None] == a[None, :])
        | (a[:, None] == b[None, :])
        | (b[:, None] == a[None, :])
        | (b[:, None] == b[None, :])
    )
    cross = (o1 * o2 < 0) & (o3 * o4 < 0) & ~shared
    count = int(np.triu(cross, 1).sum())
    # a node within a small distance of an edge's inside
    pts = np.stack([x, y], 1)
    d = q - p
    ln2 = (d * d).sum(1)
    ln2[ln2 == 0] = 1.0
    t = ((pts[None, :, :] - p[:, None, :]) * d[:, None, :]).sum(2) / ln2[:, None]
    proj = p[:, None, :] + t[..., None] * d[:, None, :]
    near = np.sqrt(((pts[None, :, :] - proj) ** 2).sum(2)) < 0.12
    inside = (t > 0.02) & (t < 0.98)
    own = (np.arange(len(x))[None, :] == a[:, None]) | (np.arange(len(x))[None, :] == b[:, None])
    count += 2 * int((near & inside & ~own).sum())
    return count


# ------------------------------------------------------------------- scene
@dataclass
class Prim:
    """One drawing primitive in pixels (y down). ``kind``: line, quad, polygon, circle, rect, text."""

    kind: str
    pts: list[tuple[float, float]] = field(default_factory=list)
    fill: str = "none"
    stroke: str = "none"
    width: float = 1.0
    dash: str = ""
    r: float = 0.0
    text: str = ""
    size: float = 11.0
    anchor: str = "start"
    weight: str = "normal"
    cls: str = ""
    attrs: dict = field(default_factory=dict)
    group: str | None = None  # element name the primitive belongs to


@dataclass
class Scene:
    width: float
    height: float
    prims: list[Prim]
    groups: dict[str, dict]  # element name -> data attributes
    title: str


_SX, _SY = 100.0, 78.0  # pixels per layout unit
_MARGIN = 46.0


def _short_current(i: float) -> str:
    return si(abs(i), "A", 3)


def scene(sol, title: str | None = None) -> Scene:
    """The picture as pixel primitives (shared by the SVG and PNG writers)."""
    net = sol.netlist
    lay = layout(sol)
    status = element_status(sol)
    corners = [q for lines in lay.wires.values() for line in lines for q in line]
    xs = [p[0] for p in lay.pos.values()] + [q[0] for q in corners] or [0.0]
    ys = [p[1] for p in lay.pos.values()] + [q[1] for q in corners] or [0.0]
    xmin, _xmax, _ymin, ymax = min(xs), max(xs), min(ys), max(ys)
    head = title if title is not None else (net.title or "")
    top_pad = (64.0 if head else 34.0) + (22.0 if lay.banks else 0.0)
    left_pad = _MARGIN + 40.0

    def px(p):
        return (left_pad + (p[0] - xmin) * _SX, top_pad + (ymax - p[1]) * _SY)

    P = {nd: px(p) for nd, p in lay.pos.items()}
    prims: list[Prim] = []
    groups: dict[str, dict] = {}
    imax = max((abs(float(c)) for c in sol.i), default=0.0)
    eps = max(imax * 1e-9, 1e-12)

    def width_of(i):
        return 1.2 + 5.8 * math.sqrt(abs(i) / imax) if imax > 0 else 1.2

    # bank frames
    for blk in lay.banks:
        xa, ya = px((blk["x0"], blk["y1"]))
        xb, yb = px((blk["x1"], blk["y0"]))
        info = blk["info"]
        prims.append(
            Prim(
                "rect",
                [(xa - 42, ya - 30), (xb + 42, yb + 16)],
                fill="#f3f6f8",
                stroke="#b8c2cc",
                width=1.0,
                dash="5 4",
                r=8,
            )
        )
        up = [px(line[0])[0] for lines in lay.wires.values() for line in lines if line[1][1] > line[0][1]]
        up = [x for x in up if xa - 40 <= x <= xb + 40]
        tx = max(up) + 8 if up else xa - 36
        prims.append(
            Prim(
                "text",
                [(tx, ya - 36)],
                text=f"bank {blk['name']}: {info['series']}s{info['parallel']}p, tap {info['tap']}",
                size=11.5,
                weight="bold",
                fill=_INK,
            )
        )
        down = [px(line[0])[0] for lines in lay.wires.values() for line in lines if line[1][1] < line[0][1]]
        for j in range(blk["strings"]):
            sx, _ = px((blk["x0"] + j * 1.25, blk["y1"]))
            clash = any(abs(sx - x) < 1 for x in down)  # a wire leaves this column downwards
            prims.append(
                Prim(
                    "text",
                    [(sx - 5 if clash else sx, yb + 12)],
                    text=f"s{j + 1}",
                    size=10,
                    anchor="end" if clash else "middle",
                    fill=_MUTED,
                )
            )

    # elements drawn between the same two points are bent apart
    pairs: dict[tuple, list[int]] = {}
    E = {}
    for k, el in enumerate(net.elements):
        pa, pb = (px(p) for p in lay.ends[el.name])
        E[el.name] = (pa, pb)
        key = tuple(sorted((tuple(round(c, 1) for c in pa), tuple(round(c, 1) for c in pb))))
        pairs.setdefault(key, []).append(k)
    bend_of = {}
    for key, ks in pairs.items():
        for m, k in enumerate(ks):
            el = net.elements[k]
            bend = (m - (len(ks) - 1) / 2) * 34.0 if len(ks) > 1 else 0.0
            if len(ks) > 1 and tuple(round(c, 1) for c in E[el.name][0]) != key[0]:
                bend = -bend  # same side whichever way the element is written
            bend_of[el.name] = bend

    # bus bars where parallel branches meet a node
    for nd, (bx0, bx1, by) in lay.bars.items():
        (xa, ya), (xb, _) = px((bx0, by)), px((bx1, by))
        prims.append(
            Prim("line", [(xa - 3, ya), (xb + 3, ya)], stroke=_INK, width=4.0, cls="bar", attrs={"data-node": nd})
        )

    # plain wires from a bank's row to where its outside chains run
    for nd, lines in lay.wires.items():
        for line in lines:
            pts = [px(q) for q in line]
            for q0, q1 in zip(pts, pts[1:]):
                prims.append(Prim("line", [q0, q1], stroke=_INK, width=2.2, cls="stub", attrs={"data-node": nd}))

    legend_kinds: dict[str, None] = {}
    requests: list = []
    for el in net.elements:
        a, b = el.nodes
        i = float(sol.current(el.name))
        cat, _vs = status[el.name]
        colour = STATUS[cat][0]
        pa, pb = E[el.name]
        bend = bend_of[el.name]
        if a == b:
            bend = 30.0
            pb = (pa[0] + 0.01, pa[1])
        flowing = abs(i) > eps
        open_switch = el.kind == "switch" and el.get("state") == "open"
        groups[el.name] = {
            "name": el.name,
            "kind": el.kind,
            "from": a,
            "to": b,
            "current": repr(i),
            "status": cat,
        }
        lw = width_of(i) if flowing else 1.2
        ctrl = _control(pa, pb, bend)
        dash = "4 3" if (open_switch or not flowing) else ""
        if el.kind == "link" and not flowing:
            dash = "2 3"
        prims.append(
            Prim(
                "quad" if bend else "line",
                [pa, ctrl, pb] if bend else [pa, pb],
                stroke=colour,
                width=lw,
                dash=dash,
                group=el.name,
                cls="wire",
            )
        )
        # badge at the middle, arrow downstream of it
        mid, tan = _point(pa, ctrl, pb, 0.5)
        legend_kinds[el.kind] = None
        prims += _badge(el, mid, tan, colour, lw)
        length = _length(pa, ctrl, pb)
        if flowing:
            forward = i > 0  # first node -> second node
            t = 0.5 + (1 if forward else -1) * min(0.28, (16 + 9 + lw) / max(length, 1.0))
            at, tg = _point(pa, ctrl, pb, t)
            d = tg if forward else (-tg[0], -tg[1])
            prims.append(_arrow(at, d, max(7.5, 3.0 + 1.6 * lw), colour, el.name))
        # label
        label = lay.bank_elements.get(el.name, el.name)
        if el.name in lay.bank_elements and el.kind == "link" and ("strap" in label or "lead" in label):
            text = None  # a strap carries its cell's current: no label of its own
        else:
            text = label if not flowing else f"{label}  {_short_current(i)}"
            if open_switch:
                text = f"{label} (open)"
        if text:
            requests.append((mid, tan, text, lw, el.name))

    # nodes
    ground = net.ground
    names: list = []
    for nd, (x, y) in P.items():
        prims.append(
            Prim(
                "circle",
                [(x, y)],
                r=3.2 if nd in lay.bank_nodes else 4.0,
                fill=_INK,
                cls="node",
                attrs={"data-node": nd, "data-potential": repr(sol.potential(nd))},
            )
        )
        if nd in lay.quiet:
            pass
        elif (
            nd not in lay.bank_nodes
            or nd in (b.get("info", {}).get("pos") for b in lay.banks)
            or nd in (b.get("info", {}).get("neg") for b in lay.banks)
        ):
            names.append((nd, (x, y)))
        if nd == ground:
            # the ground mark hangs below the node, or beside it when a wire leaves downwards
            gx = x + 16 if any(line[1][1] < line[0][1] for line in lay.wires.get(nd, ())) else x
            prims.append(
                Prim("polygon", [(gx - 7, y + 8), (gx + 7, y + 8), (gx, y + 16)], fill="none", stroke=_INK, width=1.3)
            )
            prims.append(Prim("text", [(gx + 10, y + 17)], text="0 V", size=9, fill=_MUTED))

    crowd = _Crowding(P, prims)
    prims += _place_names(names, crowd)
    prims += _place_labels(requests, crowd)
    # a label placed left of the leftmost element must not leave the picture: shift it all right
    boxes = [_text_box(p.pts[0][0], p.pts[0][1], p.text, p.size, p.anchor) for p in prims if p.kind == "text"]
    left = min([b[0] for b in boxes] + [q[0] for p in prims for q in p.pts], default=0.0)
    if left < 8.0:
        shift = 8.0 - left
        for p in prims:
            p.pts = [(q[0] + shift, q[1]) for q in p.pts]
        P = {nd: (x + shift, y) for nd, (x, y) in P.items()}
        boxes = [(b[0] + shift, b[1], b[2] + shift, b[3]) for b in boxes]
    else:
        shift = 0.0
    xs_px = [p[0] for p in P.values()] + [px(q)[0] + shift for q in corners]
    ys_px = [p[1] for p in P.values()] + [px(q)[1] for q in corners]
    right = max([b[2] for b in boxes], default=0.0) + 16.0
    width = max(max(xs_px) + _MARGIN + 150, right, 520.0, 0.62 * 14 * len(head) + 32)  # room for labels and title
    height = max(ys_px) + _MARGIN
    legend, lh = _legend(width, height, imax, list(legend_kinds), {c for c, _ in status.values()})
    prims += legend
    height += lh
    if head:
        prims.insert(0, Prim("text", [(16, 24)], text=head, size=14, weight="bold", fill=_INK))
    return Scene(width, height, prims, groups, head)


def _control(pa, pb, bend):
    mx, my = (pa[0] + pb[0]) / 2, (pa[1] + pb[1]) / 2
    dx, dy = pb[0] - pa[0], pb[1] - pa[1]
    ln = math.hypot(dx, dy) or 1.0
    # a quadratic Bezier's midpoint lies halfway to its control point: double the bend
    return (mx - dy / ln * bend * 2, my + dx / ln * bend * 2)


def _point(pa, c, pb, t):
    """Point and unit tangent of the quadratic Bezier pa-c-pb at t."""
    u = 1 - t
    x = u * u * pa[0] + 2 * u * t * c[0] + t * t * pb[0]
    y = u * u * pa[1] + 2 * u * t * c[1] + t * t * pb[1]
    tx = 2 * u * (c[0] - pa[0]) + 2 * t * (pb[0] - c[0])
    ty = 2 * u * (c[1] - pa[1]) + 2 * t * (pb[1] - c[1])
    ln = math.hypot(tx, ty) or 1.0
    return (x, y), (tx / ln, ty / ln)


def _length(pa, c, pb):
    pts = [_point(pa, c, pb, t / 8)[0] for t in range(9)]
    return sum(math.dist(p, q) for p, q in zip(pts, pts[1:], strict=False))


def _arrow(at, d, size, colour, name):
    tip = (at[0] + d[0] * size * 0.6, at[1] + d[1] * size * 0.6)
    base = (at[0] - d[0] * size * 0.6, at[1] - d[1] * size * 0.6)
    nx, ny = -d[1], d[0]
    half = size * 0.55
    b1 = (base[0] + nx * half, base[1] + ny * half)
    b2 = (base[0] - nx * half, base[1] - ny * half)
    return Prim("polygon", [tip, b1, b2], fill=colour, stroke="#ffffff", width=0.8, cls="arrow", group=name)


def _badge(el, mid, tan, colour, lw):
    """A small mark of the element's kind at the middle of its line (shapes of our own)."""
    x, y = mid
    tx, ty = tan
    nx, ny = -ty, tx

    def box(half_len, half_wid, fill, stroke, radius=0.0, cls="badge"):
        pts = [
            (x - tx * half_len - nx * half_wid, y - ty * half_len - ny * half_wid),
            (x + tx * half_len - nx * half_wid, y + ty * half_len - ny * half_wid),
            (x + tx * half_len + nx * half_wid, y + ty * half_len + ny * half_wid),
            (x - tx * half_len + nx * half_wid, y - ty * half_len + ny * half_wid),
        ]
        return Prim("polygon", pts, fill=fill, stroke=stroke, width=1.6, cls=cls, group=el.name)

    k = el.kind
    w = max(lw / 2 + 3.5, 6.0)
    out: list[Prim] = []
    if k == "cell":
        # a filled block; the plus end (the first node) gets a bright cap
        out.append(box(9, w, colour, _INK))
        cap = (x - tx * 9, y - ty * 9)
        out.append(Prim("circle", [cap], r=3.2, fill="#ffffff", stroke=_INK, width=1.2, group=el.name))
    elif k == "source":
        out.append(Prim("circle", [mid], r=w + 2, fill="#ffffff", stroke=colour, width=2.2, group=el.name))
        cap = (x - tx * (w + 2), y - ty * (w + 2))
        out.append(Prim("circle", [cap], r=3.2, fill="#ffffff", stroke=_INK, width=1.2, group=el.name))
    elif k == "supply":
        out.append(Prim("circle", [mid], r=w + 2, fill="#ffffff", stroke=colour, width=2.2, group=el.name))
        out.append(Prim("circle", [mid], r=max(w - 2, 2), fill="none", stroke=colour, width=1.2, group=el.name))
    elif k == "load":
        out.append(box(11, w + 1, "#ffffff", colour))
        out.append(box(5, 1.6, colour, "none"))
    elif k == "resistor":
        out.append(box(9, w - 1, "#ffffff", colour))
    elif k == "fuse":
        out.append(box(8, w - 1.5, "#ffffff", colour))
        out.append(
            Prim("line", [(x - tx * 8, y - ty * 8), (x + tx * 8, y + ty * 8)], stroke=colour, width=1.4, group=el.name)
        )
    elif k == "switch":
        out.append(
            Prim("circle", [(x - tx * 6, y - ty * 6)], r=2.6, fill="#ffffff", stroke=colour, width=1.4, group=el.name)
        )
        out.append(
            Prim("circle", [(x + tx * 6, y + ty * 6)], r=2.6, fill="#ffffff", stroke=colour, width=1.4, group=el.name)
        )
    elif k == "diode":
        # a wedge from anode (first node) to cathode, and a bar at the cathode
        tipx, tipy = x + tx * 6, y + ty * 6
        bx, by = x - tx * 6, y - ty * 6
        out.append(
            Prim(
                "polygon",
                [(tipx, tipy), (bx + nx * w, by + ny * w), (bx - nx * w, by - ny * w)],
                fill="#ffffff",
                stroke=colour,
                width=1.6,
                group=el.name,
            )
        )
        out.append(
            Prim(
                "line",
                [(tipx + nx * w, tipy + ny * w), (tipx - nx * w, tipy - ny * w)],
                stroke=colour,
                width=2.2,
                group=el.name,
            )
        )
    # cables and links: the line alone
    return out


def _text_box(x, y, text, size, anchor):
    w = 0.6 * size * len(text)
    x0 = {"start": x, "middle": x - w / 2, "end": x - w}[anchor]
    return (x0 - 2, y - size * 0.85, x0 + w + 2, y + size * 0.25)


def _overlap(b1, b2) -> float:
    dx = min(b1[2], b2[2]) - max(b1[0], b2[0])
    dy = min(b1[3], b2[3]) - max(b1[1], b2[1])
    return dx * dy if dx > 0 and dy > 0 else 0.0


class _Crowding:
    """What a label would cover: node dots, badges, arrows and text already placed (as boxes)
    and wires (as sample points)."""

    def __init__(self, P, prims):
        self.taken = [(x - 5, y - 5, x + 5, y + 5) for x, y in P.values()]
        samples = []
        for p in prims:
            if p.cls in ("badge", "arrow"):
                xs = [q[0] for q in p.pts]
                ys = [q[1] for q in p.pts]
                self.taken.append((min(xs), min(ys), max(xs), max(ys)))
            elif p.kind == "text":
                self.taken.append(_text_box(p.pts[0][0], p.pts[0][1], p.text, p.size, p.anchor))
            if p.cls in ("wire", "bar", "stub"):
                if p.kind == "line":
                    (x1, y1), (x2, y2) = p.pts
                    samples += [(x1 + (x2 - x1) * t / 12, y1 + (y2 - y1) * t / 12) for t in range(1, 12)]
                else:
                    samples += [_point(*p.pts, t / 12)[0] for t in range(1, 12)]
        self.S = np.array(samples) if samples else np.zeros((0, 2))

    def cost(self, box) -> float:
        c = sum(_overlap(box, t) for t in self.taken)
        if len(self.S):
            S = self.S
            c += 40.0 * int(((S[:, 0] > box[0]) & (S[:, 0] < box[2]) & (S[:, 1] > box[1]) & (S[:, 1] < box[3])).sum())
        return c

    def best(self, cands, text, size):
        """The candidate (x, y, anchor) whose box covers least (earlier ones preferred a little);
        its box is then taken."""
        best = None
        for k, (cx, cy, anchor) in enumerate(cands):
            box = _text_box(cx, cy, text, size, anchor)
            cost = self.cost(box) + k * 0.5
            if best is None or cost < best[0]:
                best = (cost, cx, cy, anchor, box)
        _, cx, cy, anchor, box = best
        self.taken.append(box)
        return cx, cy, anchor


def _place_names(names, crowd):
    """Node names at the free corner of their dot (upper left preferred)."""
    out = []
    for nd, (x, y) in names:
        cands = [(x - 6, y - 8, "end"), (x + 6, y - 8, "start"), (x - 6, y + 15, "end"), (x + 6, y + 15, "start")]
        cx, cy, anchor = crowd.best(cands, nd, 9.5)
        out.append(Prim("text", [(cx, cy)], text=nd, size=9.5, anchor=anchor, fill=_MUTED, cls="nodename"))
    return out


def _place_labels(requests, crowd):
    """Put each element's label beside its badge where it covers the fewest other marks."""
    out = []
    size = 10.5
    for mid, (tx, ty), text, lw, name in requests:
        off = lw / 2 + 10
        x, y = mid
        right = (x + off, y + 4, "start")
        left = (x - off, y + 4, "end")
        above = (x, y - off + 2, "middle")
        below = (x, y + off + 8, "middle")
        if abs(ty) > abs(tx):
            cands = [
                right,
                left,
                (x + off, y - 10, "start"),
                (x + off, y + 16, "start"),
                (x - off, y - 10, "end"),
                (x - off, y + 16, "end"),
            ]
        else:
            cands = [
                above,
                below,
                (x + 20, y - off + 2, "start"),
                (x - 20, y - off + 2, "end"),
                (x + 20, y + off + 8, "start"),
                (x - 20, y + off + 8, "end"),
            ]
        cx, cy, anchor = crowd.best(cands, text, size)
        out.append(Prim("text", [(cx, cy)], text=text, size=size, anchor=anchor, fill=_INK, cls="label", group=name))
    return out


_KIND_WORDS = {
    "cell": "cell (white cap: + end)",
    "source": "source (white cap: + end)",
    "supply": "current supply",
    "load": "load",
    "resistor": "resistor",
    "fuse": "fuse",
    "switch": "switch",
    "diode": "diode (anode to bar)",
    "cable": "cable (line only)",
    "link": "link, strap (line only)",
}


class _Fake:
    """Stands in for an element when the legend draws a kind's mark."""

    name = ""

    def __init__(self, kind):
        self.kind = kind

    def get(self, key, default=None):
        return default


def _legend(width, y0, imax, kinds, cats):
    prims = []
    y = y0 + 10
    prims.append(Prim("line", [(16, y), (width - 16, y)], stroke="#d5dbe1", width=1.0))
    y += 20
    x = 16.0
    prims.append(Prim("text", [(x, y)], text="Colour: worst check", size=10.5, weight="bold", fill=_INK))
    x += 128
    for cat in ("fail", "close", "pass", "none"):
        colour, words = STATUS[cat]
        if x + 34 + 6.2 * len(words) > width - 16:
            x = 144.0
            y += 22
        prims.append(Prim("line", [(x, y - 4), (x + 22, y - 4)], stroke=colour, width=5))
        prims.append(Prim("text", [(x + 27, y)], text=words, size=10.5, fill=_INK))
        x += 34 + 6.2 * len(words)
    y += 22
    x = 16.0
    prims.append(
        Prim(
            "text",
            [(x, y)],
            text="Arrow: the way the current flows. Width grows with current"
            + (f" (widest {si(imax, 'A', 3)})." if imax else "."),
            size=10.5,
            fill=_INK,
        )
    )
    y += 22
    x = 16.0
    prims.append(Prim("text", [(x, y)], text="Marks:", size=10.5, weight="bold", fill=_INK))
    x += 48
    line_h = 0.0
    for k in kinds:
        words = _KIND_WORDS.get(k, k)
        wlen = 40 + 6.0 * len(words)
        if x + wlen > width - 16:
            x = 64.0
            y += 22
        fake = _Fake(k)
        prims.append(Prim("line", [(x, y - 4), (x + 28, y - 4)], stroke=STATUS["none"][0], width=1.6))
        prims += _badge(fake, (x + 14, y - 4), (1.0, 0.0), STATUS["none"][0], 1.2)
        prims.append(Prim("text", [(x + 34, y)], text=words, size=10.5, fill=_INK))
        x += wlen
        line_h = 22
    y += line_h + 4
    for p in prims:
        p.group = None
        if p.cls in ("badge", "arrow"):
            p.cls = "legend"
    return prims, y - y0


# --------------------------------------------------------------------- SVG
def _num(v: float) -> str:
    return f"{v:.1f}".rstrip("0").rstrip(".") if abs(v - round(v)) > 1e-9 else str(int(round(v)))


def _pts(pts):
    return " ".join(f"{_num(x)},{_num(y)}" for x, y in pts)


def _prim_svg(p: Prim) -> str:
    cls = f' class="{p.cls}"' if p.cls else ""
    extra = "".join(f' {k}="{escape(str(v))}"' for k, v in p.attrs.items())
    dash = f' stroke-dasharray="{p.dash}"' if p.dash else ""
    if p.kind == "line":
        (x1, y1), (x2, y2) = p.pts
        return f'<line{cls} x1="{_num(x1)}" y1="{_num(y1)}" x2="{_num(x2)}" y2="{_num(y2)}" stroke="{p.stroke}" stroke-width="{_num(p.width)}"{dash} stroke-linecap="round"{extra}/>'
    if p.kind == "quad":
        (x1, y1), (cx, cy), (x2, y2) = p.pts
        return f'<path{cls} d="M{_num(x1)},{_num(y1)} Q{_num(cx)},{_num(cy)} {_num(x2)},{_num(y2)}" fill="none" stroke="{p.stroke}" stroke-width="{_num(p.width)}"{dash} stroke-linecap="round"{extra}/>'
    if p.kind == "polygon":
        return f'<polygon{cls} points="{_pts(p.pts)}" fill="{p.fill}" stroke="{p.stroke}" stroke-width="{_num(p.width)}" stroke-linejoin="round"{extra}/>'
    if p.kind == "circle":
        (x, y) = p.pts[0]
        return f'<circle{cls} cx="{_num(x)}" cy="{_num(y)}" r="{_num(p.r)}" fill="{p.fill}" stroke="{p.stroke}" stroke-width="{_num(p.width)}"{extra}/>'
    if p.kind == "rect":
        (x1, y1), (x2, y2) = p.pts
        return f'<rect{cls} x="{_num(x1)}" y="{_num(y1)}" width="{_num(x2 - x1)}" height="{_num(y2 - y1)}" rx="{_num(p.r)}" fill="{p.fill}" stroke="{p.stroke}" stroke-width="{_num(p.width)}"{dash}{extra}/>'
    if p.kind == "text":
        (x, y) = p.pts[0]
        weight = ' font-weight="bold"' if p.weight == "bold" else ""
        anchor = f' text-anchor="{p.anchor}"' if p.anchor != "start" else ""
        return f'<text{cls} x="{_num(x)}" y="{_num(y)}" font-size="{_num(p.size)}"{anchor}{weight} fill="{p.fill}"{extra}>{escape(p.text)}</text>'
    raise ValueError(p.kind)


def svg(sol, title: str | None = None, standalone: bool = True) -> str:
    """The network picture as SVG text.

    ``standalone`` adds the XML declaration and fixed pixel size for a ``.svg`` file; without it
    the SVG scales to its container (for inline use in the HTML report).
    """
    sc = scene(sol, title)
    return svg_of_scene(sc, standalone)


def svg_of_scene(sc: Scene, standalone: bool = True, style: str = "") -> str:
    """The scene as SVG text; ``style``: an inline CSS style for the ``<svg>`` element."""
    w, h = sc.width, sc.height
    size = f' width="{_num(w)}" height="{_num(h)}"' if standalone else ""
    if style:
        size += f' style="{escape(style)}"'

    out = []
    if standalone:
        out.append('<?xml version="1.0" encoding="UTF-8"?>')
    out.append(
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {_num(w)} {_num(h)}"{size} class="dcnet-picture" role="img" '
        f'font-family="{_FONT}">'
    )
    out.append(f"<title>{escape(sc.title or 'dcnet network picture')}</title>")
    out.append(f'<rect x="0" y="0" width="{_num(w)}" height="{_num(h)}" fill="#ffffff"/>')
    # elements first (lines, badges, arrows, labels), then nodes on top, then the rest
    by_group: dict[str, list[Prim]] = {}
    loose: list[Prim] = []
    for p in sc.prims:
        if p.group is not None:
            by_group.setdefault(p.group, []).append(p)
        else:
            loose.append(p)
    frames = [p for p in loose if p.kind == "rect"]
    for p in frames:
        out.append(_prim_svg(p))
    labels: list[str] = []
    for name, ps in by_group.items():
        g = sc.groups[name]
        data = " ".join(f'data-{k}="{escape(str(v))}"' for k, v in g.items())
        out.append(f'<g class="element" {data}>')
        for p in ps:
            if p.cls == "label":
                labels.append(_prim_svg(p))
            else:
                out.append(_prim_svg(p))
        out.append("</g>")
    for p in loose:
        if p.kind != "rect":
            out.append(_prim_svg(p))
    # labels last, on a white halo, so lines never hide them
    if labels:
        out.append('<g class="labels" paint-order="stroke" stroke="#ffffff" stroke-width="3" stroke-linejoin="round">')
        out += labels
        out.append("</g>")
    out.append("</svg>")
    return "\n".join(out) + "\n"


# --------------------------------------------------------------------- PNG
def write_png(sol, path, title: str | None = None, dpi: int = 150) -> None:
    """Render the same picture to a PNG file with matplotlib (imported here only)."""
    from ..files import atomic_write_bytes

    data = png_bytes(scene(sol, title), dpi=dpi)
    atomic_write_bytes(path, data, protect=sol.netlist.files)


def png_bytes(sc: Scene, dpi: int = 150) -> bytes:
    import io

    try:
        import matplotlib
    except ImportError as exc:  # pragma: no cover - depends on the installation
        from ..errors import InputError

        raise InputError(
            "PNG output needs matplotlib, which is not installed",
            hint='install it with: pip install "dcnet[plot]" (or write .svg)',
        ) from exc
    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure
    from matplotlib.patches import Circle, FancyBboxPatch, PathPatch, Polygon
    from matplotlib.path import Path as MPath

    fig = Figure(figsize=(sc.width / 100, sc.height / 100), dpi=100)
    ax = fig.add_axes((0, 0, 1, 1))
    ax.set_xlim(0, sc.width)
    ax.set_ylim(sc.height, 0)
    ax.set_axis_off()
    pt = 0.72  # points per pixel at 100 dpi
    z = 1

    def dashes(p):
        return (0, tuple(float(s) * pt for s in p.dash.split())) if p.dash else "solid"

    order = (
        [p for p in sc.prims if p.kind == "rect"]
        + [p for p in sc.prims if p.kind != "rect" and p.cls != "label"]
        + [p for p in sc.prims if p.cls == "label"]
    )
    for p in order:
        z += 1
        col = lambda c: "none" if c == "none" else c  # noqa: E731
        if p.kind == "line":
            (x1, y1), (x2, y2) = p.pts
            ax.plot(
                [x1, x2],
                [y1, y2],
                color=p.stroke,
                lw=p.width * pt,
                linestyle=dashes(p),
                solid_capstyle="round",
                zorder=z,
            )
        elif p.kind == "quad":
            path = MPath(p.pts, [MPath.MOVETO, MPath.CURVE3, MPath.CURVE3])
            ax.add_patch(
                PathPatch(path, fill=False, edgecolor=p.stroke, lw=p.width * pt, linestyle=dashes(p), zorder=z)
            )
        elif p.kind == "polygon":
            ax.add_patch(
                Polygon(
                    p.pts,
                    closed=True,
                    facecolor=col(p.fill),
                    edgecolor=col(p.stroke),
                    lw=p.width * pt,
                    joinstyle="round",
                    zorder=z,
                )
            )
        elif p.kind == "circle":
            ax.add_patch(
                Circle(p.pts[0], p.r, facecolor=col(p.fill), edgecolor=col(p.stroke), lw=p.width * pt, zorder=z)
            )
        elif p.kind == "rect":
            (x1, y1), (x2, y2) = p.pts
            ax.add_patch(
                FancyBboxPatch(
                    (x1, y1),
                    x2 - x1,
                    y2 - y1,
                    boxstyle=f"round,pad=0,rounding_size={p.r}",
                    facecolor=col(p.fill),
                    edgecolor=col(p.stroke),
                    lw=p.width * pt,
                    linestyle=dashes(p),
                    zorder=z,
                )
            )
        elif p.kind == "text":
            import matplotlib.patheffects as pe

            effects = [pe.withStroke(linewidth=3 * pt, foreground="white")] if p.cls == "label" else None
            ax.text(
                p.pts[0][0],
                p.pts[0][1],
                p.text,
                fontsize=p.size * pt,
                ha={"start": "left", "middle": "center", "end": "right"}[p.anchor],
                va="baseline",
                color=p.fill,
                fontweight=p.weight,
                path_effects=effects,
                zorder=z,
                family="DejaVu Sans",
            )
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi, facecolor="white")
    return buf.getvalue()
