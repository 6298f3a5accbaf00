"""A small nodal solver written here, independent of dcnet, for the checks' references.

Branches (passive sign, current from a to b):

* ``("r", a, b, R)``: i = (V_a - V_b) / R (Ohm's law);
* ``("emf", a, b, E, R)``: a source of EMF E behind R, first node positive: i = (V_a - V_b - E) / R;
* ``("i", a, b, I)``: a fixed current I from a to b.

``merge`` joins pairs of nodes by zero-ohm links (bolted faults); the current each link carries
from its first node to its second is returned beside the branch currents. Kirchhoff's current
law at every node but ground, solved with numpy's dense solver.
"""

from __future__ import annotations

import numpy as np


def solve(branches, ground, merge=()):
    nodes = sorted({b[1] for b in branches} | {b[2] for b in branches})
    parent = {n: n for n in nodes}

    def find(n):
        while parent[n] != n:
            n = parent[n]
        return n

    for x, y in merge:
        rx, ry = find(x), find(y)
        if rx != ry:
            parent[ry] = rx
    groups = sorted({find(n) for n in nodes})
    g0 = find(ground)
    unknown = [g for g in groups if g != g0]
    row = {g: k for k, g in enumerate(unknown)}
    A = np.zeros((len(unknown), len(unknown)))
    z = np.zeros(len(unknown))

    def stamp(a, b, G, J):
        # current G (V_a - V_b) + J leaves a and enters b
        for u, s in ((a, 1.0), (b, -1.0)):
            if u in row:
                if a in row:
                    A[row[u], row[a]] += s * G
                if b in row:
                    A[row[u], row[b]] -= s * G
                z[row[u]] -= s * J

    for br in branches:
        a, b = find(br[1]), find(br[2])
        if br[0] == "r":
            stamp(a, b, 1.0 / br[3], 0.0)
        elif br[0] == "emf":
            stamp(a, b, 1.0 / br[4], -br[3] / br[4])
        else:
            stamp(a, b, 0.0, br[3])
    x = np.linalg.solve(A, z) if len(unknown) else np.zeros(0)
    pot = {n: (0.0 if find(n) == g0 else float(x[row[find(n)]])) for n in nodes}
    cur = []
    for br in branches:
        va, vb = pot[br[1]], pot[br[2]]
        if br[0] == "r":
            cur.append((va - vb) / br[3])
        elif br[0] == "emf":
            cur.append((va - vb - br[3]) / br[4])
        else:
            cur.append(br[3])
    links = []
    for x_, _y in merge:
        # the link takes from x whatever x's own branches bring in
        into = 0.0
        for br, i in zip(branches, cur):
            if br[1] == x_:
                into -= i
            if br[2] == x_:
                into += i
        links.append(into)
    return pot, cur, links
