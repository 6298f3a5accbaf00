"""The ``bank`` shorthand: series strings of cells in parallel, expanded to ordinary elements.

``bank NAME POS NEG series=S parallel=P cell=PART [strap=R] [bus=R] [lead=R]
[fuse=RATING fuse_r=R interrupt=I] [tap=same|opposite|centre] [ageing=F]
[spread=X% seed=N] [sJ.cI.PROP=V] [sJ.PROP=V]``

Names of the expanded elements (J = string 1..P, I = cell 1..S from the negative end):

* cells ``NAME.sJ.cI`` between nodes ``NAME.sJ.cI+`` and ``NAME.sJ.cI-`` (with no strap,
  a cell's negative node is the previous cell's positive node);
* straps ``NAME.sJ.strapI`` (links of resistance ``strap``) between cell I and I+1;
* per-string fuse ``NAME.sJ.fuse`` (rating ``fuse``, resistance ``fuse_r``) on the positive end;
* per-string leads ``NAME.sJ.lead+`` and ``NAME.sJ.lead-`` (resistance ``lead`` each) to the buses;
* bus segments ``NAME.bus+.J`` and ``NAME.bus-.J`` (resistance ``bus``) between the junctions
  of string J and J+1 (junction nodes ``NAME.pos.J`` and ``NAME.neg.J``).

The bank's terminals POS and NEG are the junctions where the main leads are taken:
``tap=same`` (default) at string 1 for both; ``opposite``: POS at string 1, NEG at string P;
``centre``: both at the middle string. Without ``bus`` every string meets POS and NEG directly.

Per-cell variation: ``sJ.cI.PROP=V`` sets one cell's property, ``sJ.PROP=V`` a whole
string's; ``ageing=F`` (and ``sJ.ageing``, ``sJ.cI.ageing``) multiplies internal resistance;
``spread=X% seed=N`` multiplies each cell's part resistance by an independent factor drawn
uniformly from [1 - X, 1 + X] (seeded, so a file always expands the same way). A resistance
given explicitly for a cell or string is used as given (ageing still applies).
"""

from __future__ import annotations

import re
from typing import Any

from ..errors import DcnetError, InputError, Span, UnknownNameError, ValueRangeError
from ..kinds import KINDS
from ..kinds.base import Kind, Prop, nonnegative, positive
from ..netlist import Element
from ..units import CURRENT, DIMENSIONLESS, RESISTANCE

__all__ = ["expand_bank", "element_count", "BANK"]


def _count(name: str, x: float) -> None:
    if x != int(x) or x < 1:
        raise ValueRangeError(f"{name} must be a whole number of at least 1, got {x:g}")
    if x > 100_000:
        raise ValueRangeError(f"{name}={x:g} is beyond any real bank")


def _fraction(name: str, x: float) -> None:
    if not 0 <= x < 1:
        raise ValueRangeError(f"{name} must lie between 0% and 100%, got {x * 100:g}%")


BANK = Kind(
    name="bank",
    doc="series strings of cells in parallel (expanded to cells, straps, fuses, leads, bus segments)",
    props={
        "series": Prop("series", DIMENSIONLESS, required=True, check=_count, doc="cells in series per string"),
        "parallel": Prop("parallel", DIMENSIONLESS, required=True, check=_count, doc="strings in parallel"),
        "cell": Prop("cell", form="word", required=True, doc="part name of the cells (a cell part)"),
        "strap": Prop("strap", RESISTANCE, check=nonnegative, doc="strap between neighbouring cells of a string"),
        "bus": Prop("bus", RESISTANCE, check=nonnegative, doc="bus segment between neighbouring strings, each bus"),
        "lead": Prop("lead", RESISTANCE, check=nonnegative, doc="each string's lead to each bus"),
        "fuse": Prop("fuse", CURRENT, check=positive, doc="per-string fuse rating"),
        "fuse_r": Prop("fuse_r", RESISTANCE, check=nonnegative, doc="per-string fuse resistance"),
        "interrupt": Prop("interrupt", CURRENT, check=positive, doc="per-string fuse interrupting capacity"),
        "tap": Prop("tap", form="word", words=("same", "opposite", "centre", "center"), default="same", doc="where the main leads are taken"),
        "ageing": Prop("ageing", DIMENSIONLESS, check=positive, doc="factor on every cell's internal resistance"),
        "spread": Prop("spread", DIMENSIONLESS, check=_fraction, doc="uniform spread of cell resistance (±)"),
        "seed": Prop("seed", DIMENSIONLESS, check=_count, doc="seed of the spread"),
    },
)

_TARGET = re.compile(r"^s([0-9]+)(?:\.c([0-9]+))?\.([A-Za-z_][A-Za-z0-9_]*)$")


def element_count(S: int, P: int, present) -> int:
    """How many elements a bank of S cells in series by P strings expands to (``present``: the
    bank's properties given): counted before anything is expanded."""
    n = S * P
    if "strap" in present:
        n += (S - 1) * P
    if "fuse" in present:
        n += P
    if "lead" in present:
        n += 2 * P
    if "bus" in present and P > 1:
        n += 2 * (P - 1)
    return n


def expand_bank(st, s, file: str) -> None:
    """Elaborate one ``bank`` statement into elements (called by the elaborator)."""
    from .elaborate import _check_new_name, _resolve_prop, _src, add_element, element_values

    _, local_name, pos, neg = s.args
    scope = st.scope
    name = scope.name(local_name)
    name_span = Span(file, *s.arg_pos[1], len(local_name))
    span = Span(file, s.line, s.column, 4)
    _check_new_name(st, name, name_span)
    cell_kind = KINDS["cell"]

    own = [p for p in s.props if not _TARGET.match(p.key)]
    targeted = [p for p in s.props if _TARGET.match(p.key)]
    values: dict[str, Any] = {}
    st.pending_deps = {}
    for p in own:
        if p.key in values:
            raise InputError(f"property '{p.key}' is given twice", span=Span(file, p.line, p.column, len(p.key)))
        values[p.key] = _resolve_prop(st, BANK, p, file, name)
    bank_deps = dict(st.pending_deps)
    for spec in BANK.props.values():
        if spec.name not in values:
            if spec.required:
                raise InputError(f"bank {name} needs {spec.name}= ({spec.doc})", span=name_span, hint="e.g. bank B pos neg series=4 parallel=3 cell=agm12")
            if spec.default is not None:
                values[spec.name] = spec.default
    S, P = int(values["series"]), int(values["parallel"])
    count = element_count(S, P, values)
    have = len(st.net.elements)
    if have + count > st.options.max_elements:
        from ..errors import LimitError

        raise LimitError(
            f"bank {name} ({S:,} in series x {P:,} in parallel) expands to {count:,} elements"
            + (f", with the {have:,} before it {have + count:,}" if have else "")
            + f", above the limit of {st.options.max_elements:,} elements",
            span=name_span,
            hint="raise the limit with --max-elements if the file is trusted",
        )
    part_name = values["cell"]
    part = st.parts.get(part_name)
    if part is None or part[0] != "cell":
        from .parser import suggest

        cells = [k for k, v in st.parts.items() if v[0] == "cell"]
        near = suggest(part_name, cells)
        cell_prop = next(p for p in own if p.key == "cell")
        raise UnknownNameError(
            f"'{part_name}' is not a cell part" if part else f"unknown part '{part_name}'",
            span=Span(file, cell_prop.line, cell_prop.value_column, len(cell_prop.raw)),
            hint=(f"did you mean '{near}'? " if near else "") + "define it first with: part NAME cell emf=... r=...",
        )
    if "fuse" not in values and ("fuse_r" in values or "interrupt" in values):
        raise InputError("fuse_r= and interrupt= need a per-string fuse rating fuse=", span=name_span)

    # per-string and per-cell overrides
    per_string: dict[int, dict[str, Any]] = {}
    per_cell: dict[tuple[int, int], dict[str, Any]] = {}
    target_deps: dict[tuple, dict[str, Any]] = {}
    for p in targeted:
        j, i, key = _TARGET.match(p.key).groups()
        j = int(j)
        i = int(i) if i else None
        kspan = Span(file, p.line, p.column, len(p.key))
        if not 1 <= j <= P or (i is not None and not 1 <= i <= S):
            raise InputError(
                f"{p.key}: bank {name} has strings s1..s{P} and cells c1..c{S}",
                span=kspan,
            )
        st.pending_deps = {}
        if key == "ageing":
            q = _resolve_prop(st, BANK, _renamed(p, "ageing"), file, name)
        else:
            q = _resolve_prop(st, cell_kind, _renamed(p, key), file, f"{name}.{p.key}")
        target = per_string.setdefault(j, {}) if i is None else per_cell.setdefault((j, i), {})
        if key in target:
            raise InputError(f"property '{p.key}' is given twice", span=kspan)
        target[key] = q
        if key in st.pending_deps:
            target_deps.setdefault((j, i), {})[key] = st.pending_deps[key]

    rng = None
    if values.get("spread"):
        import numpy as np

        rng = np.random.default_rng(int(values.get("seed", 1)))

    tap = (st.options.tap_override or values["tap"]).replace("center", "centre")
    tp, tn = {"same": (1, 1), "opposite": (1, P), "centre": ((P + 1) // 2, (P + 1) // 2)}[tap]
    POS, NEG = scope.node(pos), scope.node(neg)
    has_bus = "bus" in values and P > 1

    def junction(pole: str, j: int) -> str:
        if not has_bus:
            return POS if pole == "+" else NEG
        if pole == "+":
            return POS if j == tp else f"{name}.pos.{j}"
        return NEG if j == tn else f"{name}.neg.{j}"

    def add(kind: str, ename: str, a: str, b: str, vals: dict[str, Any]) -> None:
        _check_new_name(st, ename, name_span)
        add_element(st, Element(ename, kind, (a, b), vals, span))

    def finished(kind: str, ename: str, vals: dict[str, Any], deps: dict[str, Any] | None = None) -> dict[str, Any]:
        out = element_values(st, KINDS[kind], (), file, ename, name_span, extra=vals)
        st.pending_deps = dict(deps or {})  # recorded by add_element for studies
        return out

    def own_deps(mapping: dict[str, str]) -> dict[str, Any]:
        return {prop: bank_deps[key] for key, prop in mapping.items() if key in bank_deps}

    part_deps = st.part_deps.get(part_name, {})

    strings: list[list[str]] = []
    # every element in series in each string, with the sign that turns its passive current into
    # the cells' (+1: drawn from the cell's + to its - node, charging positive)
    members: list[list[tuple[str, int]]] = []
    bank_ageing = values.get("ageing", 1.0)
    base_cell = dict(part[1])
    try:
        for j in range(1, P + 1):
            names = []
            chain: list[tuple[str, int]] = []
            s_over = per_string.get(j, {})
            has_strap = "strap" in values
            bottom = junction("-", j)
            top = junction("+", j)
            # negative end: lead to the bus
            node = bottom
            if "lead" in values:
                node = f"{name}.s{j}.c1-"
                add("link", f"{name}.s{j}.lead-", node, bottom, finished("link", f"{name}.s{j}.lead-", {"r": values["lead"]}, own_deps({"lead": "r"})))
                chain.append((f"{name}.s{j}.lead-", 1))
            for i in range(1, S + 1):
                c_over = per_cell.get((j, i), {})
                cell_vals = dict(base_cell)
                explicit_r = "r" in s_over or "r" in c_over
                cell_vals.update({k: v for k, v in s_over.items() if k != "ageing"})
                cell_vals.update({k: v for k, v in c_over.items() if k != "ageing"})
                factor = bank_ageing * s_over.get("ageing", 1.0) * c_over.get("ageing", 1.0)
                if rng is not None:
                    u = float(rng.uniform(-values["spread"], values["spread"]))
                    if not explicit_r:
                        factor *= 1.0 + u
                if "r" in cell_vals:
                    cell_vals["r"] = cell_vals["r"] * factor
                cname = f"{name}.s{j}.c{i}"
                last = i == S
                plus = top if (last and "fuse" not in values and "lead" not in values) else f"{name}.s{j}.c{i}+"
                deps = {k: t for k, t in part_deps.items() if k not in s_over and k not in c_over}
                deps.update(target_deps.get((j, None), {}))
                deps.update(target_deps.get((j, i), {}))
                if "r" in deps and factor != 1.0:
                    from ..units import Quantity

                    deps["r"] = ("mul", deps["r"], ("q", Quantity(factor), 0, 0))
                add("cell", cname, plus, node, finished("cell", cname, cell_vals, deps))
                names.append(cname)
                chain.append((cname, 1))
                node = plus
                if not last and has_strap:
                    nxt = f"{name}.s{j}.c{i + 1}-"
                    add("link", f"{name}.s{j}.strap{i}", node, nxt, finished("link", f"{name}.s{j}.strap{i}", {"r": values["strap"]}, own_deps({"strap": "r"})))
                    chain.append((f"{name}.s{j}.strap{i}", -1))
                    node = nxt
            # positive end: fuse, then lead, to the bus
            if "fuse" in values:
                fvals = {"rating": values["fuse"]}
                if "fuse_r" in values:
                    fvals["r"] = values["fuse_r"]
                if "interrupt" in values:
                    fvals["interrupt"] = values["interrupt"]
                after = top if "lead" not in values else f"{name}.s{j}.fused"
                add("fuse", f"{name}.s{j}.fuse", node, after, finished("fuse", f"{name}.s{j}.fuse", fvals, own_deps({"fuse": "rating", "fuse_r": "r", "interrupt": "interrupt"})))
                chain.append((f"{name}.s{j}.fuse", -1))
                node = after
            if "lead" in values:
                add("link", f"{name}.s{j}.lead+", node, top, finished("link", f"{name}.s{j}.lead+", {"r": values["lead"]}, own_deps({"lead": "r"})))
                chain.append((f"{name}.s{j}.lead+", -1))
            strings.append(names)
            members.append(chain)
        if has_bus:
            for j in range(1, P):
                for pole in "+-":
                    seg = f"{name}.bus{pole}.{j}"
                    add("link", seg, junction(pole, j), junction(pole, j + 1), finished("link", seg, {"r": values["bus"]}, own_deps({"bus": "r"})))
    except DcnetError as err:
        err.with_span(name_span, _src(st, file, s.line))
        raise
    st.net.banks[name] = {
        "series": S,
        "parallel": P,
        "tap": tap,
        "pos": POS,
        "neg": NEG,
        "strings": strings,
        "members": members,
        "span": span,
        "prefix": name + ".",
    }


def _renamed(p, key: str):
    from .parser import Prop as StmtProp

    return StmtProp(key, p.raw, p.line, p.column, p.value_column)
