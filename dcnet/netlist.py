"""The flat netlist: the one data structure every layer shares.

Upstream (the language layer) builds it; downstream (topology, assembly,
solving, checks, presentation) only reads it. It knows nothing of syntax and
nothing of matrices.

Element values are resolved SI floats (Celsius for temperature) or words,
already validated by the element kind. Node names map to consecutive indices in
order of first appearance, so arrays built from the netlist are reproducible.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from .errors import Span

__all__ = ["Element", "Limit", "Netlist", "bank_alone"]


@dataclass(frozen=True, slots=True)
class Element:
    """One two-terminal element: a cell, cable, load ...

    ``nodes`` is (first, second); for sources the first node is the positive
    terminal. ``values`` holds the resolved properties, including ones the kind
    derived (a cable's ``r``).
    """

    name: str
    kind: str
    nodes: tuple[str, str]
    values: dict[str, Any]
    span: Span = Span()

    def get(self, key: str, default: Any = None) -> Any:
        return self.values.get(key, default)


@dataclass(frozen=True, slots=True)
class Limit:
    """A ``limit`` statement, kept for the checks layer."""

    rule: str
    values: dict[str, Any]
    span: Span = Span()


@dataclass
class Netlist:
    """Nodes, elements, ground and limits of one circuit.

    Build it with :meth:`add` (the language layer does); read it anywhere.
    """

    title: str = ""
    ground: str | None = None
    ground_rule: str = ""
    elements: list[Element] = field(default_factory=list)
    limits: list[Limit] = field(default_factory=list)
    values: dict[str, tuple[float, Any, float | None]] = field(default_factory=dict)
    #: expression trees, for studies that vary the named values: ``("let", NAME)`` -> the
    #: let's value tree (``("value", expr, tolerance_or_None)``); ``("element", NAME, PROP)``
    #: -> the tree of an element property that uses let values (before the kind's ``finish``
    #: derives anything from it). Trees are those of dcnet.language.expressions.
    exprs: dict[tuple, Any] = field(default_factory=dict)
    files: list[str] = field(default_factory=list)
    #: bank shorthand metadata: name -> {series, parallel, tap, pos, neg, strings (cell names per string), prefix}
    banks: dict[str, dict[str, Any]] = field(default_factory=dict)
    #: the charge/discharge schedule written in the file (dcnet.analysis.cycle.Phase records)
    phases: list[Any] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    #: the rule set the circuit is built to (``practice NAME``; None: the general default)
    practice: str | None = None
    node_index: dict[str, int] = field(default_factory=dict)
    _by_name: dict[str, int] = field(default_factory=dict, repr=False)
    # node indices and kind groups kept as elements are added (read by analysis.branches)
    _a: list[int] = field(default_factory=list, repr=False)
    _b: list[int] = field(default_factory=list, repr=False)
    _by_kind: dict[str, list[int]] = field(default_factory=dict, repr=False)
    _cache: dict[str, Any] = field(default_factory=dict, repr=False)

    # ------------------------------------------------------------------ build
    def add(self, element: Element) -> None:
        """Append an element; its name must be new."""
        if element.name in self._by_name:
            raise ValueError(f"duplicate element name {element.name!r}")
        pos = len(self.elements)
        self._by_name[element.name] = pos
        self.elements.append(element)
        idx = self.node_index
        na, nb = element.nodes
        if na not in idx:
            idx[na] = len(idx)
        if nb not in idx:
            idx[nb] = len(idx)
        self._a.append(idx[na])
        self._b.append(idx[nb])
        group = self._by_kind.get(element.kind)
        if group is None:
            group = self._by_kind[element.kind] = []
        group.append(pos)
        if self._cache:
            self._cache.clear()

    def add_node(self, name: str) -> int:
        if name not in self.node_index:
            self.node_index[name] = len(self.node_index)
            self._cache.clear()
        return self.node_index[name]

    # ------------------------------------------------------------------- read
    @property
    def nodes(self) -> list[str]:
        return list(self.node_index)

    def indices(self) -> tuple[list[int], list[int], dict[str, list[int]]]:
        """First-node and second-node indices of every element, and element positions by kind."""
        return self._a, self._b, self._by_kind

    def element(self, name: str) -> Element:
        try:
            return self.elements[self._by_name[name]]
        except KeyError:
            raise KeyError(name) from None

    def has_element(self, name: str) -> bool:
        return name in self._by_name

    def element_position(self, name: str) -> int:
        return self._by_name[name]

    def __len__(self) -> int:
        return len(self.elements)

    def cached(self, key: str, build):
        """Memoise a derived structure until the netlist changes."""
        if key not in self._cache:
            self._cache[key] = build()
        return self._cache[key]

    # ------------------------------------------------------------- analysis
    def solve(self, checks: bool = True, **options):
        """Solve the circuit and (by default) run the installation checks.

        See :func:`dcnet.analysis.solve.solve` for the options; the checks' verdicts are in
        ``Solution.verdicts`` (objects) and ``Solution.checks`` (dicts, as in the JSON output).
        """
        from .analysis.solve import solve

        sol = solve(self, **options)
        if checks:
            sol.run_checks()
        return sol


def bank_alone(net: Netlist, bank: dict) -> Netlist:
    """A bank's own elements as a circuit of their own: terminals open, grounded at its NEG."""
    sub = Netlist(title=net.title)
    prefix = bank["prefix"]
    for el in net.elements:
        if el.name.startswith(prefix):
            sub.add(el)
    sub.ground = bank["neg"]
    sub.ground_rule = "ground statement"
    return sub
