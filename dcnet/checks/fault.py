"""Prospective fault current: the worst bolted fault a fuse would have to break.

**What is modelled.** A bolted fault: a zero-ohm connection between two nodes, no arc
resistance, every cell at the EMF and internal resistance the file gives, every cable at the
temperature written. The network is taken in its *fault state*, not linearised at the
operating point, each choice being the one that gives the larger fault current:

* constant-power loads (inverters, converters) and constant-current loads (regulated
  electronics) collapse: at a faulted bus they draw nothing, and anything they drew elsewhere
  would only lower the sources' voltage. Resistive loads stay what they are (physics);
* a current-limited source (a charger with ``imax``) delivers its limit: the fault pulls its
  terminals below the voltage it would hold, and the limit is the most it can give;
* supplies (ideal current sources) deliver their current;
* diodes take the state the fault gives them: each fault is solved with the diodes as open or
  conducting, flipping any whose state contradicts its voltage or current, until the states
  hold. A conducting piecewise-linear diode keeps its forward drop and resistance; a conducting
  junction diode is taken as a zero-ohm, zero-drop connection (an upper bound on what it passes);
  a blocked diode without ``roff`` is open.

**Where.** The prospective figure at a fuse is the worst bolted fault from either of its
terminals (the load side, and the source side, which the other strings of a bank feed through
the fuse backwards) to any conductor of another group (every node not joined to the fuse by
conductors: the other pole's bus bars, cable ends and cell terminals; in a network of more than
:data:`MAX_RETURNS` nodes, the source terminals only); the verdict says which. Each bank's
terminals (POS to NEG) get the same figure for information.

**How.** By Thevenin's theorem the fault current between x and y is ``V_oc / Z_xy``, and every
element's current during the fault follows by superposition. ``V_oc`` is the fault-state network's
own open-circuit solution, and the transfer impedances of all candidates come from one
factorisation of it: one block of right-hand sides, a unit injection at every candidate node
(for a linear circuit the fault-state matrix is the solve's own, so the solve's factorisation
serves; with diodes, one factorisation per diode-state pattern that some fault needs).
"""

from __future__ import annotations

import numpy as np

from . import Series, elements_of

__all__ = ["rules", "MODEL", "MAX_RETURNS", "fault_state", "prospective"]

MODEL = (
    "prospective bolted fault (zero-ohm, no arc; cells at the file's EMF and resistance, cables as written; "
    "constant-power and constant-current loads collapsed, chargers at their current limit, diodes as the fault biases them)"
)
SOURCE_NO_RATING = "no interrupt rating given: figure for information"
#: networks with more nodes take only source terminals as fault return points
MAX_RETURNS = 2000
_MAX_PATTERNS = 24


def _amps(x: float) -> str:
    return "unlimited (ideal path)" if not np.isfinite(x) else f"{x:.4g} A"


# ------------------------------------------------------------------ the fault-state network
def fault_state(net, bt, diode_on: np.ndarray | None = None, unsupplied=()):
    """Branch arrays (is_voltage, g, c, e) of the network in its fault state, for one diode-state
    pattern (``diode_on``: per element, True for a conducting diode)."""
    is_v, g, c, e = bt.is_voltage.copy(), bt.g.copy(), bt.c.copy(), bt.e.copy()
    if "load" in bt.groups:
        pos, cols = bt.groups["load"]
        drawn = ~np.isnan(cols["current"]) | ~np.isnan(cols["power"])
        g[pos[drawn]] = 0.0
        c[pos[drawn]] = 0.0
    for name in unsupplied:
        k = net.element_position(name)
        g[k] = c[k] = 0.0
    if "source" in bt.groups:
        pos, cols = bt.groups["source"]
        lim = ~np.isnan(cols["imax"])
        p = pos[lim]
        is_v[p] = False
        g[p] = 0.0
        e[p] = 0.0
        c[p] = -cols["imax"][lim]
    leak = np.full(len(g), np.nan)
    if "diode" in bt.groups:
        pos, cols = bt.groups["diode"]
        on = np.zeros(len(pos), dtype=bool) if diode_on is None else diode_on[pos]
        junction = ~np.isnan(cols["is"])
        r, drop, roff = cols["r"], cols["drop"], cols["roff"]
        resistive = ~junction & (r > 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            g_on = np.where(resistive, 1.0 / np.where(resistive, r, 1.0), 0.0)
            g_off = np.where(roff > 0, 1.0 / np.where(roff > 0, roff, 1.0), 0.0)
        is_v[pos] = on & ~resistive
        e[pos] = np.where(on & ~resistive, np.where(junction, 0.0, drop), 0.0)
        g[pos] = np.where(on, g_on, g_off)
        c[pos] = np.where(on & resistive, -drop * g_on, 0.0)
        leak[pos] = np.where(~on & ~(roff > 0), 1e-12, np.nan)
    return is_v, g, c, e, leak


def _rhs(bt, rows, c, e, is_voltage, vb) -> np.ndarray:
    """Right-hand side(s) of the MNA system for source values c, e (samples x elements)."""
    row, N, _ = rows
    c = np.atleast_2d(c)
    e = np.atleast_2d(e)
    S = c.shape[0]
    m = N + len(vb)
    z = np.zeros((S, m))
    cur = np.where(is_voltage | (bt.a == bt.b), 0.0, c)
    ra, rb = row[bt.a], row[bt.b]
    for k in np.flatnonzero(np.any(cur != 0, axis=0)):
        if ra[k] >= 0:
            z[:, ra[k]] -= cur[:, k]
        if rb[k] >= 0:
            z[:, rb[k]] += cur[:, k]
    if len(vb):
        z[:, N:] = e[:, vb]
    return z


#: unit right-hand sides solved together (SuperLU's block solve slows down sharply for wide blocks)
CHUNK = 64


class _Response:
    """Open-circuit solution and unit responses of one fault-state network (samples x ...).

    A unit response is a column of the inverse of the network's matrix: the potentials (and
    branch currents) when a unit current is injected at one node (or a unit voltage put in one
    ideal branch's row). Columns are solved on demand, a block at a time (:meth:`need`), and
    dropped when no longer needed (:meth:`forget`), so memory stays proportional to the
    network times :data:`CHUNK`, whatever the number of fuses.

    The matrix of every network made of two-terminal branches is symmetric (each stamp is a
    symmetric pair, see ``analysis.mna.triplets``; pinning islands adds to the diagonal only),
    so the potential at x for a unit at y is the potential at y for a unit at x: the transfer
    impedance between a fuse terminal t and every return point r comes from t's own column,
    and only the return points' own impedances (the diagonal, :meth:`diagonal`) need theirs.
    ``symmetric=False`` (a matrix that is not) takes every return point's column instead.
    """

    def __init__(self, bt, rows, solve, x_oc: np.ndarray, g: np.ndarray, c: np.ndarray, is_voltage: np.ndarray, symmetric: bool = True):
        row, N, vb = rows
        self.row, self.N, self.vb = row, N, vb
        self.m = N + len(vb)
        self.vpos = {int(p): j for j, p in enumerate(vb)}
        self.solve = solve  # B (unknowns x k) -> (samples, unknowns, k)
        self.bt, self.g, self.c, self.is_voltage = bt, np.atleast_2d(g), np.atleast_2d(c), is_voltage
        self.X0 = x_oc  # (S, unknowns)
        self.pot_oc = self._potentials(x_oc[:, :, None])[:, :, 0]  # (S, n)
        self.symmetric = symmetric
        self.cols: dict[tuple[str, int], np.ndarray] = {}  # key -> (S, unknowns)
        self.diag = np.zeros((x_oc.shape[0], bt.n_nodes))
        self._diag_done = np.zeros(bt.n_nodes, dtype=bool)

    def _potentials(self, X: np.ndarray) -> np.ndarray:
        S, _, k = X.shape
        pot = np.zeros((S, self.bt.n_nodes, k))
        mask = self.row >= 0
        pot[:, mask, :] = X[:, self.row[mask], :]
        return pot

    def _unknown(self, key) -> int:
        kind, x = key
        return int(self.row[x]) if kind == "n" else self.N + self.vpos[x]

    def _solve_block(self, keys) -> np.ndarray:
        B = np.zeros((self.m, len(keys)))
        for j, key in enumerate(keys):
            u = self._unknown(key)
            if u >= 0:
                B[u, j] = 1.0
        return self.solve(B)

    def need(self, keys) -> None:
        """Solve the columns of ``keys`` (("n", node) or ("b", element)) not held yet, a block at a time."""
        todo = [k for k in dict.fromkeys(keys) if k not in self.cols]
        for s in range(0, len(todo), CHUNK):
            part = todo[s : s + CHUNK]
            X = self._solve_block(part)
            for j, key in enumerate(part):
                self.cols[key] = X[:, :, j]

    def forget(self) -> None:
        self.cols.clear()

    def diagonal(self, nodes) -> None:
        """Each node's own response (its impedance to ground), solved a block at a time and only kept on the diagonal."""
        todo = [int(x) for x in np.unique(np.asarray(nodes, dtype=np.int64)) if not self._diag_done[x]]
        for s in range(0, len(todo), CHUNK):
            part = todo[s : s + CHUNK]
            X = self._solve_block([("n", x) for x in part])
            for j, x in enumerate(part):
                u = self.row[x]
                self.diag[:, x] = X[:, u, j] if u >= 0 else 0.0
            self._diag_done[part] = True

    def at(self, key, nodes) -> np.ndarray:
        """Potentials at ``nodes`` for the unit of column ``key`` (S, len(nodes)); ground is 0."""
        if key not in self.cols:  # (a diode's own row, when the fault makes it conduct)
            self.need([key])
        col = self.cols[key]
        u = self.row[nodes]
        out = np.where(u >= 0, col[:, np.maximum(u, 0)], 0.0)
        if self._unknown(key) < 0:
            out = np.zeros_like(out)
        return out

    def cross(self, x: int, returns: np.ndarray) -> np.ndarray:
        """Potential at node x for a unit at each return point (S, R)."""
        if self.symmetric:
            return self.at(("n", x), returns)
        self.need([("n", int(r)) for r in returns])
        return np.stack([self.at(("n", int(r)), np.array([x]))[:, 0] for r in returns], axis=1)

    def keys_for(self, t: int, k: int | None) -> list:
        """The columns a point needs: its terminal, and the watched element's nodes or row."""
        keys = [("n", t)]
        if k is not None:
            keys += [("n", int(self.bt.a[k])), ("n", int(self.bt.b[k]))]
            if self.is_voltage[k]:
                kk = k if k in self.vpos else int(self.bt.representative[k])
                if kk in self.vpos:
                    keys.append(("b", kk))
        return keys

    def pairs(self, t: int, returns: np.ndarray):
        """(fault current (S, R), the fault's terminal, its return points) of faults t -> each return."""
        p_tt = self.at(("n", t), np.array([t]))  # (S, 1)
        p_rt = self.at(("n", t), returns)  # potential at r for a unit at t
        p_tr = p_rt if self.symmetric else self.cross(t, returns)
        Z = p_tt - p_tr - p_rt + self.diag[:, returns]
        voc = self.pot_oc[:, t][:, None] - self.pot_oc[:, returns]
        with np.errstate(divide="ignore", invalid="ignore"):
            tiny = Z <= 1e-15 * np.maximum(1.0, np.abs(voc))
            i_f = np.where(tiny, np.where(voc != 0, np.inf, 0.0), voc / np.where(tiny, 1.0, Z))
        return i_f, t, returns

    def _w(self, x: int, t: int, returns: np.ndarray) -> np.ndarray:
        """Potential at x per unit of fault current from t into each return point (S, R)."""
        return self.at(("n", t), np.array([x])) - self.cross(x, returns)

    def branch_during(self, k: int, i_f, t, returns):
        """Voltage and current of element k during each fault (S, R)."""
        bt = self.bt
        a, b = int(bt.a[k]), int(bt.b[k])
        v_oc = self.pot_oc[:, a] - self.pot_oc[:, b]
        dw = self._w(a, t, returns) - self._w(b, t, returns)
        fin = np.isfinite(i_f)
        i_s = np.where(fin, i_f, 0.0)
        v = v_oc[:, None] - i_s * dw
        if self.is_voltage[k] and k not in self.vpos:
            # an exact parallel duplicate of an ideal branch shares its group's current equally
            # (as the solve shows it: dcnet.analysis.solve.currents)
            rep = int(bt.representative[k])
            count = int((bt.representative == rep).sum())
            way = 1.0 if bt.a[k] == bt.a[rep] else -1.0
            v_r, i_r = self.branch_during(rep, i_f, t, returns)
            return v, way * i_r / count
        if self.is_voltage[k]:
            j = self.N + self.vpos[k]
            i_oc = self.X0[:, j]
            # the branch current for a unit at node x is, by symmetry, the potential at x for a
            # unit in the branch's row
            if self.symmetric:
                unit_t = self.at(("b", k), np.array([t]))
                unit_r = self.at(("b", k), returns)
            else:
                self.need([("n", t)])
                unit_t = self.cols[("n", t)][:, j][:, None]
                self.need([("n", int(r)) for r in returns])
                unit_r = np.stack([self.cols[("n", int(r))][:, j] for r in returns], axis=1)
            i = i_oc[:, None] - i_s * (unit_t - unit_r)
        else:
            g = self.g[:, k] if self.g.shape[0] > 1 else np.full(v.shape[0], self.g[0, k])
            c = self.c[:, k] if self.c.shape[0] > 1 else np.full(v.shape[0], self.c[0, k])
            i = g[:, None] * v + c[:, None]
        return v, np.where(fin, i, np.inf)


# ------------------------------------------------------------------ candidates
def _candidates(net, s, fuse_nodes: set[int]) -> tuple[np.ndarray, str]:
    """Return points: every node (or, in a large network, every source terminal) outside islands."""
    from ..kinds import KINDS

    bt = s.branches
    n = bt.n_nodes
    allowed = np.ones(n, dtype=bool)
    if s.islands:
        allowed &= ~s.islands.floating
    note = ""
    if n > MAX_RETURNS:
        terms = set()
        for kind_name, (pos, _cols) in bt.groups.items():
            if KINDS[kind_name].is_source:
                terms |= {int(x) for x in bt.a[pos]} | {int(x) for x in bt.b[pos]}
        keep = np.zeros(n, dtype=bool)
        keep[list(terms | fuse_nodes)] = True
        allowed &= keep
        note = f"; return points limited to source terminals (the network has {n:,} nodes)"
    return np.flatnonzero(allowed), note


def prospective(net, s, points: list[tuple[int, np.ndarray, int | None]]):
    """For each point (terminal node, return nodes, element to watch or None), per sample:
    (largest current through the element over the returns (or in the fault when None), fault
    current of that worst case, index of the worst return). Diode states are iterated to the
    fault's own."""
    from ..analysis.branches import branch_table
    from ..analysis.islands import pinned_system
    from ..analysis.mna import Factor

    bt = s.branches
    seen = np.zeros(bt.n_nodes, dtype=bool)
    for _t, rr, _k in points:
        seen[rr] = True
    returns_all = np.flatnonzero(seen)
    if not s.nonlinear:
        rows_full = s.rows
        row, N, vb = rows_full
        dead = [name for name in s.unsupplied]
        _, gf, cf, ef, _ = fault_state(net, bt, None, dead)
        c_s = np.where(np.isnan(np.atleast_2d(s.c)), 0.0, np.atleast_2d(s.c))
        # the solve's own sources, with the loads that collapse in a fault taken out
        drawn = (cf == 0) & (bt.c != 0) & ~bt.is_voltage
        c_s = np.where(drawn[None, :], 0.0, c_s)
        z = _rhs(bt, rows_full, c_s, np.atleast_2d(s.e), s.is_voltage, vb)
        x_oc = s.solve_more(z[:, :, None])[:, :, 0]
        resp = _Response(bt, rows_full, s.solve_more, x_oc, s.g, c_s, s.is_voltage, symmetric=_symmetric(s))
        resp.diagonal(returns_all)
        out = []
        # points a block at a time: their columns solved together, then dropped
        k0 = 0
        while k0 < len(points):
            keys, k1 = [], k0
            while k1 < len(points) and (not keys or len(keys) < CHUNK):
                t, _rr, k = points[k1]
                keys += resp.keys_for(t, k)
                k1 += 1
            resp.need(keys)
            out += [_evaluate(resp, t, rr, k) for t, rr, k in points[k0:k1]]
            resp.forget()
            k0 = k1
        return out, None
    # nonlinear (one solve): iterate diode states per fault
    base = branch_table(net)
    diodes = base.groups["diode"][0] if "diode" in base.groups else np.zeros(0, dtype=np.int64)
    start = np.zeros(base.n_elements, dtype=bool)
    for p in diodes:
        start[p] = s.state(base.names[int(p)]) == "conducting"
    cache: dict[bytes, _Response] = {}
    diode_keys = [("n", int(x)) for p in diodes for x in (base.a[p], base.b[p])]

    def response(on: np.ndarray) -> _Response:
        key = on.tobytes()
        if key not in cache:
            is_v, g, c, e, leak = fault_state(net, base, on, s.unsupplied)
            import dataclasses

            model = dataclasses.replace(base, is_voltage=is_v, g=g, c=c, e=e, leak=leak, nonlinear=np.zeros(base.n_elements, dtype=bool))
            system = pinned_system(model)
            factor = Factor(system)
            row, N, vb = system.row_of_node, system.n_node_rows, system.vbranch

            def solve(B):
                return np.asarray(factor.solve(B)).reshape(B.shape)[None]

            x_oc = solve(system.z[:, None])[:, :, 0]
            r = _Response(model, (row, N, vb), solve, x_oc, g, c, is_v, symmetric=_matrix_symmetric(system.A))
            r.diagonal(returns_all)
            r.islands = system.islands
            cache[key] = r
        return cache[key]

    results = []
    for t, rr, k in points:
        best = None
        # each return point keeps its own diode pattern; group them by pattern
        pending = {start.tobytes(): (start.copy(), np.arange(len(rr)))}
        done_val = np.full(len(rr), -np.inf)
        done_if = np.zeros(len(rr))
        for _round in range(_MAX_PATTERNS):
            nxt: dict[bytes, tuple[np.ndarray, list]] = {}
            for _key, (on, idx) in pending.items():
                resp = response(on)
                resp.need(resp.keys_for(t, k) + diode_keys)
                ok_r = np.ones(len(idx), dtype=bool)
                i_f, tt, ri = resp.pairs(t, rr[idx])
                flips = np.zeros((len(diodes), len(idx)), dtype=bool)
                for j, p in enumerate(diodes):
                    v, i = resp.branch_during(int(p), i_f, tt, ri)
                    v, i = v[0], i[0]
                    cols = base.groups["diode"][1]
                    jj = int(np.searchsorted(base.groups["diode"][0], p))
                    junction = not np.isnan(cols["is"][jj])
                    drop = 0.0 if junction else float(cols["drop"][jj])
                    tol = 1e-9 * max(1.0, float(np.nanmax(np.abs(np.where(np.isfinite(i), i, 0.0)), initial=0.0)))
                    if on[p]:
                        flips[j] = i < -tol
                    else:
                        flips[j] = v > drop + 1e-9 * max(1.0, abs(drop))
                ok_r = ~flips.any(axis=0)
                val = _watch(resp, k, i_f, tt, ri)[0]
                done_val[idx[ok_r]] = val[ok_r]
                done_if[idx[ok_r]] = np.abs(i_f[0][ok_r])
                for q in np.flatnonzero(~ok_r):
                    new = on.copy()
                    new[diodes[flips[:, q]]] = ~on[diodes[flips[:, q]]]
                    key = new.tobytes()
                    nxt.setdefault(key, (new, []))[1].append(idx[q])
                    if _round == _MAX_PATTERNS - 1:  # states that never settle: keep the last figure
                        done_val[idx[q]] = val[q]
                        done_if[idx[q]] = abs(i_f[0][q])
            pending = {key: (on, np.array(ix)) for key, (on, ix) in nxt.items()}
            if not pending:
                break
        for resp in cache.values():
            if len(resp.cols) > 4 * CHUNK:
                resp.forget()
        worst = int(np.argmax(done_val)) if len(rr) else 0
        best = (np.array([done_val[worst]]), np.array([done_if[worst]]), np.array([worst]))
        results.append(best)
    return results, None


def _matrix_symmetric(A) -> bool:
    """Is the matrix exactly symmetric (dense or sparse)?"""
    if isinstance(A, np.ndarray):
        return bool(np.array_equal(A, A.T))
    d = (A - A.T).tocsc()
    d.eliminate_zeros()
    return d.nnz == 0


def _symmetric(s) -> bool:
    """The solve's matrix is symmetric (one solve: checked; a study's samples are assembled by the
    same stamps, each a symmetric pair, and are taken as symmetric)."""
    system = getattr(getattr(s, "solution", None), "system", None)
    A = getattr(system, "A", None)
    return True if A is None else _matrix_symmetric(A)


def _watch(resp: _Response, k: int | None, i_f, t, returns) -> np.ndarray:
    """The figure a point is judged by: |current through element k| during each fault, or |fault current|."""
    if k is None:
        return np.abs(i_f)
    _v, i = resp.branch_during(k, i_f, t, returns)
    return np.abs(i)


def _evaluate(resp: _Response, t: int, rr: np.ndarray, k: int | None):
    i_f, tt, ri = resp.pairs(t, rr)
    val = _watch(resp, k, i_f, tt, ri)
    worst = np.argmax(np.where(np.isnan(val), -np.inf, val), axis=1)
    S = val.shape[0]
    return val[np.arange(S), worst], np.abs(i_f[np.arange(S), worst]), worst


# ------------------------------------------------------------------ the rule
def rules(net, s) -> list[Series]:
    fuses = elements_of(net, "fuse")
    if not fuses and not net.banks:
        return []
    bt = s.branches
    labels = s.sections.labels
    idx = net.node_index
    nodes = net.nodes
    points = []
    meta = []
    fuse_nodes = {idx[nd] for el in fuses for nd in el.nodes}
    returns, note = _candidates(net, s, fuse_nodes)
    floating = s.islands.floating if s.islands else np.zeros(bt.n_nodes, dtype=bool)
    for el in fuses:
        k = net.element_position(el.name)
        own = labels[bt.a[k]]
        rr = returns[(labels[returns] != own) & (labels[returns] != labels[bt.b[k]])]
        for end in dict.fromkeys(el.nodes):
            t = idx[end]
            if floating[t] or not len(rr):
                continue
            points.append((t, rr, k))
            meta.append(("fuse", el, end, rr))
    for name, bank in net.banks.items():
        t, r = idx[bank["pos"]], idx[bank["neg"]]
        if floating[t] or floating[r] or t == r:
            continue
        points.append((t, np.array([r]), None))
        meta.append(("bank", name, bank, None))
    if not points:
        return []
    results, _ = prospective(net, s, points)
    out: list[Series] = []
    best: dict[str, tuple] = {}
    for (kind, a, b, rr), (val, i_f, worst) in zip(meta, results):
        if kind == "fuse":
            prev = best.get(a.name)
            if prev is None:
                best[a.name] = (a, val, i_f, np.array([b] * s.n, dtype=object), np.array([nodes[rr[j]] for j in worst], dtype=object))
            else:
                take = val > prev[1]
                best[a.name] = (
                    a,
                    np.where(take, val, prev[1]),
                    np.where(take, i_f, prev[2]),
                    np.where(take, b, prev[3]),
                    np.where(take, np.array([nodes[rr[j]] for j in worst], dtype=object), prev[4]),
                )
        else:
            detail = f"bolted fault from {b['pos']} to {b['neg']}" if s.single else ""
            out.append(Series("fault current", f"bank {a} terminals", "A", MODEL, val, np.nan, True, sense="info", detail=detail))
    for name, (el, val, i_f, end, ret) in best.items():
        detail = ""
        if s.single:
            detail = f"worst bolted fault from {end[0]} to {ret[0]}: {_amps(float(i_f[0]))} in the fault, {_amps(float(val[0]))} through the fuse{note}"
        interrupt = el.values.get("interrupt")
        if interrupt is None:
            out.append(Series("fault current", name, "A", f"{SOURCE_NO_RATING}; {MODEL}", val, np.nan, True, sense="info", detail=detail))
        else:
            lim = np.asarray(s.value(name, "interrupt"), dtype=float)
            out.append(Series("fault current", name, "A", f"interrupt rating of {name} (as given); {MODEL}", val, lim, val <= lim, detail=detail))
    return out
