"""Closed-form results: currents, voltages, powers and potentials as formulas in kept symbols.

The formulas come from the same element stamps as the numeric solve: each kind's
``branches(cols)`` is called with sympy object arrays (kept symbols where the user keeps
them, exact rationals of the file's values elsewhere), and the MNA triplets are assembled
by :func:`dcnet.analysis.mna.triplets`. The *structure* (which branches are ideal, which
are nonlinear, which ideal sources duplicate each other) is taken from the numeric netlist,
and a symbolic model that disagrees with it is refused.

How the system is solved (see the numerical notes in the design document):

1. A kept symbol that enters the stamps only as ``1/s`` (a resistance) is replaced by a
   conductance generator ``G = 1/s``, so the nodal entries are linear polynomials.
2. Unknowns whose rows and columns hold no symbol are eliminated first (a Schur
   complement): exactly over the rationals for small blocks, in floating point for large
   ones. What remains is the part of the network the kept symbols touch.
3. Each row is scaled to clear denominators, so the system has entries in ``ZZ[G, ...]``;
   right-hand sides are split by their monomials in symbols that appear only there (EMFs,
   currents). sympy's ``DomainMatrix.solve_den`` then gives every unknown as a polynomial
   numerator over one polynomial denominator (fraction-free elimination: Cramer's rule).
4. A quantity's numerator and denominator are formed as polynomials, cancelled once,
   turned back from conductances into the kept resistances, and factored at the end.

Every formula is evaluated at the file's values and compared with the numeric solve
before it is returned. A request too large to finish is refused up front (the number of
spanning trees of the symbolic part bounds the number of terms of the denominator) or
stopped by a time budget.

sympy is imported inside the functions, never at module level.
"""

from __future__ import annotations

import keyword
import math
import re
import signal
import threading
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import InputError, LimitError, NumericalError, UnknownNameError
from ..netlist import Netlist

__all__ = [
    "Formula",
    "Kept",
    "formulas",
    "DEFAULT_TIME_BUDGET",
    "MAX_TERMS",
    "MAX_SYMBOLS",
    "MAX_UNKNOWNS",
]

#: seconds a symbolic request may take before it is stopped (0 or None: no budget)
DEFAULT_TIME_BUDGET = 60.0
#: refuse up front when the denominator may have more terms than this (spanning-tree bound)
MAX_TERMS = 2_000
#: refuse up front when more symbols than this are kept
MAX_SYMBOLS = 40
#: refuse up front when the circuit has more unknowns than this
MAX_UNKNOWNS = 20_000
#: numeric blocks up to this many unknowns are eliminated exactly; larger ones in floating point
EXACT_LIMIT = 40
#: a formula must agree with the numeric solve to this (relative to the quantity's scale)
AGREEMENT = 1e-8
#: polynomials with more terms than this are shown expanded rather than factored
FACTOR_LIMIT = 3000

_NONLINEAR_WORDS = {"load": "constant-power load", "source": "current-limited source", "diode": "diode"}
_UNITS = {"current": "A", "voltage": "V", "power": "W", "potential": "V", "between": "V"}


# --------------------------------------------------------------------------- public records


def _cut_off(sol) -> str:
    isl = sol.islands
    bt = sol.branches
    nodes = [bt.node_names[k] for part in isl.nodes for k in part][:8]
    by = sorted({bt.names[k] for cross in isl.crossing for k in cross})[:8]
    return f"node(s) {', '.join(nodes)} are cut off by {', '.join(by)}"


@dataclass(frozen=True)
class Kept:
    """A value kept as a symbol: a ``let`` name or an element property (``P1.r``)."""

    name: str
    symbol: Any
    nominal: float
    source: str  # "let" or "property"
    pyname: str
    latex: str
    unit: str = ""  # for display: V, A, Ohm, W ... ("" when it has none of those)

    def __str__(self) -> str:
        return self.name


@dataclass
class Formula:
    """A result quantity as a closed-form expression in the kept symbols.

    ``expr`` is exact (sympy rationals for the file's numbers); ``numerator`` and
    ``denominator`` are its factored parts. ``value`` is the formula at the file's values
    and ``solved`` the numeric solve's answer, which it was checked against
    (``deviation`` is their difference relative to the quantity's scale).
    """

    quantity: str
    label: str
    unit: str
    expr: Any
    numerator: Any
    denominator: Any
    coefficient: Any
    kept: tuple[Kept, ...]
    value: float
    solved: float
    deviation: float
    _func: Any = field(default=None, repr=False)
    #: remarks on the request (e.g. let values --keep-all left as numbers)
    notes: tuple[str, ...] = ()

    @property
    def symbols(self) -> tuple:
        """The sympy symbols of the kept values, in argument order."""
        return tuple(k.symbol for k in self.kept)

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(k.name for k in self.kept)

    @property
    def func(self):
        """A fast numeric function (``sympy.lambdify`` to numpy) taking the kept values
        positionally, in the order of :attr:`names`; arrays broadcast."""
        if self._func is None:

            self._func = _numeric_function(self.symbols, self.expr)
        return self._func

    def __call__(self, *args, **values):
        """Evaluate at given values: positionally (order of :attr:`names`) or by name
        (``f(r_strap=np.linspace(...))``); names not given take their value in the file."""
        if args and values:
            raise TypeError("give the values either positionally or by name")
        if args:
            if len(args) != len(self.kept):
                raise TypeError(
                    f"{self.label} takes {len(self.kept)} values ({', '.join(self.names)}), got {len(args)}"
                )
            return self.func(*args)
        by_py = {k.pyname: k for k in self.kept}
        by_name = {k.name: k for k in self.kept}
        unknown = [n for n in values if n not in by_name and n not in by_py]
        if unknown:
            raise TypeError(f"{self.label} has no symbol {', '.join(unknown)}; it has: {', '.join(self.names)}")
        vals = []
        for k in self.kept:
            vals.append(values.get(k.name, values.get(k.pyname, k.nominal)))
        out = self.func(*vals)
        return out

    # ------------------------------------------------------------- renderings
    def text(self, digits: int = 6) -> str:
        """The formula for people, numbers to ``digits`` significant figures."""
        return _render(self, "text", digits)

    def latex(self, digits: int = 6) -> str:
        """The right-hand side in LaTeX."""
        return _render(self, "latex", digits)

    def python(self, name: str | None = None) -> str:
        """A Python function computing the quantity (numbers at full precision); each argument
        defaults to its value in the file."""
        fname = name or _identifier(self.label)
        body = _render(self, "python", 17)
        args = ", ".join(f"{k.pyname}={k.nominal!r}" for k in self.kept)
        doc = f'    """{self.label} in {self.unit}; arguments in SI units (ohm, volt, ampere)."""\n'
        return f"def {fname}({args}):\n{doc}    return {body}\n"

    def latex_label(self) -> str:
        return _latex_label(self.label)

    def to_dict(self) -> dict[str, Any]:
        return {
            "quantity": self.label,
            "unit": self.unit,
            "formula": self.text(17),
            "latex": self.latex(),
            "kept": {k.name: k.nominal for k in self.kept},
            "value": self.value,
            "solved": self.solved,
            "deviation": self.deviation,
        }


# --------------------------------------------------------------------------- entry point


def formulas(
    net: Netlist,
    quantities,
    keep=(),
    *,
    keep_all: bool = False,
    time_budget: float | None = DEFAULT_TIME_BUDGET,
    max_terms: int = MAX_TERMS,
) -> list[Formula]:
    """Closed-form formulas for result quantities of a linear circuit.

    Parameters
    ----------
    net : Netlist
        The circuit (``dcnet.load`` / ``dcnet.parse``).
    quantities : str or list of str
        As ``dcnet solve --show`` writes them: ``A1.current``, ``A1.voltage``, ``P1.power``,
        ``bus+.potential`` (or ``bus+``), ``a,b`` (the voltage between two nodes).
    keep : str or list of str
        ``let`` names and element properties (``P1.r``, ``A1.emf``) to keep as symbols;
        comma-separated strings are split. Everything else is the number in the file.
    keep_all : bool
        Keep every ``let`` value the circuit's stamps use.
    time_budget : float or None
        Seconds before the request is stopped (a :class:`~dcnet.errors.LimitError`); the
        budget needs the main thread (a timer signal), elsewhere only the up-front limits apply.
    max_terms : int
        Up-front limit on the size of the denominator (a spanning-tree count).

    Returns
    -------
    list of Formula, each checked against the numeric solve at the file's values.

    Examples
    --------
    >>> import dcnet
    >>> net = dcnet.parse('''
    ... let r_load = 2 Ohm
    ... cell A pos gnd emf=12V r=0.1Ohm
    ... load L pos gnd r=r_load
    ... ''')
    >>> f = dcnet.formulas(net, ["L.current"], keep=["r_load"])[0]
    >>> f.text()
    '12/(r_load + 0.1)'
    >>> float(f(r_load=1.9))
    6.0
    """
    if isinstance(quantities, str):
        quantities = [quantities]
    if not quantities:
        raise InputError("no quantity asked for", hint="name one, e.g. A1.current, bus+.potential or a,b")
    engine = _Engine(net, keep, keep_all)
    specs = [engine.parse_quantity(q) for q in quantities]
    engine.estimate(max_terms)
    with _budget(time_budget, engine):
        engine.solve()
        return [engine.formula(spec) for spec in specs]


def equivalent_formulas(
    net, x, y, keep=(), *, keep_all=False, time_budget=DEFAULT_TIME_BUDGET, max_terms=MAX_TERMS, v_th, r_th
):
    """Formulas for the Thevenin and Norton equivalents from node x to node y (used by
    :func:`dcnet.analysis.equivalent.equivalent`, which supplies the numeric ``v_th`` and
    ``r_th`` they are checked against). Returns a dict with ``v_th``, ``r_th`` and, when
    ``r_th`` is not zero, ``i_n`` and ``g_n``."""
    engine = _Engine(net, keep, keep_all)
    engine.set_injection(x, y)
    engine.estimate(max_terms)
    vscale = max(float(np.abs(engine.sol.potentials).max(initial=0.0)), engine.bt.max_emf, 1e-300)
    where = f"({x},{y})"
    with _budget(time_budget, engine):
        engine.solve()
        vn, vd = engine.between(x, y)
        rn, rd = engine.between(x, y, column="injection")
        out = {
            "v_th": engine.formula(
                _Quantity("V_th" + where, "V_th", "V", "v_th", solved=v_th, scale=max(abs(v_th), vscale)), (vn, vd)
            ),
            "r_th": engine.formula(
                _Quantity("R_th" + where, "R_th", "Ohm", "r_th", solved=r_th, scale=abs(r_th) or 1.0), (rn, rd)
            ),
        }
        if r_th != 0:
            i_n, g_n = v_th / r_th, 1.0 / r_th
            out["i_n"] = engine.formula(
                _Quantity("I_N" + where, "I_N", "A", "i_n", solved=i_n, scale=abs(i_n) or 1.0), (vn * rd, vd * rn)
            )
            out["g_n"] = engine.formula(
                _Quantity("G_N" + where, "G_N", "S", "g_n", solved=g_n, scale=abs(g_n)), (rd, rn)
            )
    return out


# --------------------------------------------------------------------------- time budget


#: seconds between repeated rings once the budget is spent
_RING_AGAIN = 0.05


class _OutOfTime(BaseException):
    """Raised by the timer signal; a BaseException so that no library handler swallows it."""


@contextmanager
def _budget(seconds, engine):
    usable = (
        seconds
        and seconds > 0
        and hasattr(signal, "setitimer")
        and threading.current_thread() is threading.main_thread()
    )
    if not usable:
        yield
        return

    def _ring(signum, frame):
        # ring again shortly: a signal that lands in a garbage-collector callback or a
        # destructor has its exception swallowed by the interpreter, and the work would go on
        signal.setitimer(signal.ITIMER_REAL, _RING_AGAIN)
        raise _OutOfTime

    import time

    previous = signal.signal(signal.SIGALRM, _ring)
    outer, _ = signal.setitimer(signal.ITIMER_REAL, float(seconds))  # a timer someone else had set
    started = time.monotonic()
    try:
        yield
    except _OutOfTime:
        raise LimitError(
            f"the symbolic solve did not finish within its time budget of {seconds:g} s "
            f"({len(engine.kept)} kept symbols, {engine.size} unknowns in the symbolic part)",
            hint="keep fewer symbols"
            + (f" (kept: {', '.join(engine.kept)})" if engine.kept else "")
            + ", or raise --time-budget",
        ) from None
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)
        if outer:  # give the outer timer back what remains of it
            signal.setitimer(signal.ITIMER_REAL, max(outer - (time.monotonic() - started), 1e-3))


# --------------------------------------------------------------------------- helpers


def _identifier(text: str) -> str:
    out = re.sub(r"\W", "_", text.replace("+", "_pos").replace("-", "_neg").replace(",", "_to_"))
    out = re.sub(r"_+", "_", out).strip("_") or "x"
    if out[0].isdigit():
        out = "q_" + out
    if keyword.iskeyword(out):
        out += "_"
    return out


def _latex_name(name: str) -> str:
    """LaTeX for a kept name: ``r_strap`` -> ``r_{strap}``, ``P1.r`` -> ``r_{\\mathrm{P1}}``."""
    if "." in name:
        el, prop = name.rsplit(".", 1)
        prop = {"emf": "E", "current": "I", "power": "P"}.get(prop, prop)
        base = prop if len(prop) == 1 else rf"\mathrm{{{_tex_escape(prop)}}}"
        return rf"{base}_{{\mathrm{{{_tex_escape(el)}}}}}"
    head, _, tail = name.partition("_")
    head_tex = head if len(head) == 1 else rf"\mathrm{{{_tex_escape(head)}}}"
    return head_tex + (rf"_{{\mathrm{{{_tex_escape(tail)}}}}}" if tail else "")


def _tex_escape(text: str) -> str:
    return (
        text.replace("\\", r"\backslash ")
        .replace("_", r"\_")
        .replace("%", r"\%")
        .replace("#", r"\#")
        .replace("&", r"\&")
    )


def _latex_label(label: str) -> str:
    special = {
        "V_th": r"V_{\mathrm{th}}",
        "R_th": r"R_{\mathrm{th}}",
        "I_N": r"I_{\mathrm{N}}",
        "G_N": r"G_{\mathrm{N}}",
    }
    if label in special:
        return special[label]
    m = re.fullmatch(r"V\((.+),(.+)\)", label)
    if m:
        return rf"V_{{\mathrm{{{_tex_escape(m.group(1))}}},\mathrm{{{_tex_escape(m.group(2))}}}}}"
    name, _, attr = label.rpartition(".")
    letter = {"current": "I", "voltage": "V", "power": "P", "potential": r"\varphi"}.get(attr, attr)
    return rf"{letter}_{{\mathrm{{{_tex_escape(name)}}}}}"


def _unit_symbol(dim) -> str:
    from ..units import CONDUCTANCE, CURRENT, POWER, RESISTANCE, VOLTAGE

    return {VOLTAGE: "V", CURRENT: "A", RESISTANCE: "Ohm", CONDUCTANCE: "S", POWER: "W"}.get(dim, "")


def _rational(x: float):
    """A file value as an exact rational: its decimal form to 15 significant digits, which
    undoes the last-bit error of unit prefixes (4.5 mOhm is 0.0045000000000000005 as a
    float, and 9/2000 here) and changes no value by more than 1e-15 relative."""
    import sympy

    x = float(x)
    if x == int(x) and abs(x) < 1e15:
        return sympy.Integer(int(x))
    return sympy.Rational(f"{x:.15g}")


def _exact(x):
    """A stamp entry as an exact sympy number or expression (floats from array code made exact)."""
    import sympy

    if isinstance(x, sympy.Basic):
        floats = x.atoms(sympy.Float)
        if floats:
            x = x.xreplace({f: _rational(float(f)) for f in floats})
        return x
    if isinstance(x, (bool, np.bool_)):
        return sympy.Integer(int(x))
    return _rational(float(x))


def _derives_stamp(kind, el, prop: str, read: set[str]) -> bool:
    """Whether an element's kind derives a value its stamps read from property ``prop`` (a
    cable's resistance from its length). Asked of the kind's ``finish_batch`` with two
    samples; a kind that cannot say is assumed to derive."""
    batch = getattr(kind, "finish_batch", None)
    value = el.values.get(prop)
    if batch is None or isinstance(value, str) or value is None:
        return True
    v0 = float(value)
    trial = np.array([v0, v0 * 1.25 + (1.0 if v0 == 0 else 0.0)])
    try:
        out = batch(dict(el.values), {prop: trial})
    except Exception:  # noqa: BLE001 - a kind that cannot take the probe: assume it derives
        return True
    for col in read:
        arr = np.asarray(out.get(col, np.nan), dtype=float)
        if arr.ndim and len(arr) == 2 and arr[0] != arr[1]:
            return True
    return False


def _is_nan(x) -> bool:
    return isinstance(x, float) and x != x


# --------------------------------------------------------------------------- the engine


@dataclass
class _Quantity:
    spec: str
    label: str
    unit: str
    what: str  # current, voltage, power, potential, between
    a: str = ""
    b: str = ""
    solved: float = 0.0
    scale: float = 1.0


class _Engine:
    """One symbolic model of a netlist with a set of kept symbols."""

    def __init__(self, net: Netlist, keep, keep_all: bool):
        from .branches import branch_table

        self.net = net
        self.bt = bt = branch_table(net)
        if bt.is_nonlinear:
            bad = [
                f"{bt.names[p]} ({_NONLINEAR_WORDS.get(net.elements[p].kind, net.elements[p].kind)})"
                for p in np.flatnonzero(bt.nonlinear)
            ]
            raise InputError(
                "formulas need a linear circuit; nonlinear elements: "
                + ", ".join(bad[:8])
                + (" ..." if len(bad) > 8 else ""),
                hint="a formula has no closed form through a diode, a constant-power load or a current limit; "
                "replace them by linear models (a resistive load, a source without imax) to get one",
                culprits=tuple(bt.names[p] for p in np.flatnonzero(bt.nonlinear)),
            )
        self.sol = net.solve(checks=False)
        if self.sol.islands or self.sol.unsupplied:
            raise InputError(
                "formulas need every part of the circuit connected; "
                + (f"{_cut_off(self.sol)}" if self.sol.islands else f"loads without supply: {', '.join(self.sol.unsupplied)}"),
                hint="leave the cut-off part out of the file, or close what cuts it off, to get formulas",
                culprits=tuple(self.sol.unsupplied),
            )
        self.size = self.sol.system.size
        if self.size > MAX_UNKNOWNS:
            raise LimitError(
                f"the circuit has {self.size:,} unknowns; formulas are limited to {MAX_UNKNOWNS:,}",
                hint="ask for formulas on a smaller part of the installation",
            )
        self.kept: dict[str, Kept] = {}
        self._let_cache: dict[str, Any] = {}
        self.notes: list[str] = []
        self._resolve_keeps(keep, keep_all)
        if not self.kept:
            raise InputError(
                "no symbol to keep: a formula needs at least one kept value",
                hint="name let values or element properties with --keep (e.g. --keep r_strap,A1.r), or use --keep-all",
            )
        self._stamps()

    # ----------------------------------------------------------------- kept symbols
    def _resolve_keeps(self, keep, keep_all: bool) -> None:
        import sympy

        net = self.net
        names: list[str] = []
        if isinstance(keep, str):
            keep = [keep]
        for item in keep or ():
            names += [w.strip() for w in str(item).split(",") if w.strip()]
        if keep_all:
            followed, skipped = self._followable_lets()
            if not followed and not names:
                raise InputError(
                    "the circuit's elements use no let value that can stay a symbol",
                    hint="name element properties to keep instead, e.g. --keep A1.r,A1.emf",
                )
            names += [n for n in followed if n not in names]
            if skipped:
                self.notes.append(
                    "left as numbers (they reach the circuit only through values its kinds derive): "
                    + ", ".join(skipped)
                )
        if len(names) > MAX_SYMBOLS:
            raise LimitError(
                f"{len(names)} symbols kept; formulas keep at most {MAX_SYMBOLS}", hint="keep fewer symbols"
            )
        used_py: set[str] = set()
        for name in names:
            if name in self.kept:
                continue
            if name in net.values:
                nominal = float(net.values[name][0])
                source, dim = "let", net.values[name][1]
            else:
                nominal, dim = self._property_nominal(name)
                source = "property"
            assume = {"positive": True} if nominal > 0 else ({"negative": True} if nominal < 0 else {"real": True})
            sym = sympy.Symbol(name, **assume)
            py = _identifier(name)
            while py in used_py:
                py += "_"
            used_py.add(py)
            self.kept[name] = Kept(name, sym, nominal, source, py, _latex_name(name), _unit_symbol(dim))

    def _property_nominal(self, name: str) -> tuple[float, Any]:
        from ..kinds import KINDS
        from ..language.parser import suggest

        net = self.net
        el_name, _, prop = name.rpartition(".")
        if not el_name or not net.has_element(el_name):
            near = suggest(name, list(net.values) + [f"{e.name}.r" for e in net.elements])
            raise UnknownNameError(
                f"'{name}' is neither a let value nor an element property",
                hint=(f"did you mean '{near}'? " if near else "") + "keep let names or ELEMENT.PROPERTY, e.g. A1.r",
            )
        el = net.element(el_name)
        kind = KINDS[el.kind]
        spec = kind.props.get(prop)
        if spec is None or spec.form != "quantity":
            known = [p for p, s in kind.props.items() if s.form == "quantity"]
            near = suggest(prop, known)
            raise UnknownNameError(
                f"a {kind.name} has no property '{prop}' that can be kept",
                hint=(f"did you mean '{el_name}.{near}'? " if near else "") + f"a {kind.name} has: {', '.join(known)}",
            )
        value = el.values.get(prop)
        if value is None or _is_nan(value):
            raise InputError(
                f"{el.kind} {el_name} has no {prop} in the file"
                + (" (it is an ideal connection)" if prop == "r" else ""),
                hint=f"give {el_name} a {prop}= value first",
                element=el_name,
            )
        return float(value), spec.dim

    def _followable_lets(self) -> tuple[list[str], list[str]]:
        """Let names (in file order) that reach a stamped value as written and nowhere reach one
        that a kind derives; and those left as numbers because they do."""
        from ..kinds import KINDS

        direct: dict[str, bool] = {}
        unsafe: set[str] = set()
        read = self._columns_read()
        for key, tree in self.net.exprs.items():
            if key[0] != "element" or not self.net.has_element(key[1]):
                continue
            _, el_name, prop = key
            lets = self._lets_in(tree, "")
            if not lets:
                continue
            el = self.net.element(el_name)
            reads = read.get(el.kind, set())
            matches = prop in reads and self._tree_matches(tree, el.values.get(prop))
            bad = (prop in reads and not matches) or (
                prop not in reads and _derives_stamp(KINDS[el.kind], el, prop, reads)
            )
            for n in lets:
                direct[n] = direct.get(n, False) or matches
                if bad:
                    unsafe.add(n)
        order = list(self.net.values)
        followed = [n for n in order if direct.get(n) and n not in unsafe]
        skipped = [n for n in order if n in unsafe]
        return followed, skipped

    def _columns_read(self) -> dict[str, set[str]]:
        """For each kind in the circuit, the columns its stamps read (probed on the numeric values)."""
        from ..kinds import KINDS

        out: dict[str, set[str]] = {}
        for kind_name, (_, cols) in self.bt.groups.items():
            kind = KINDS[kind_name]
            base = kind.branches(cols)
            read = set()
            for col, arr in cols.items():
                trial = dict(cols)
                trial[col] = np.where(np.isnan(arr), arr, arr * 1.5 + 0.25)
                try:
                    br = kind.branches(trial)
                except Exception:  # noqa: BLE001 - a probe that breaks the kind's own checks reads the column
                    read.add(col)
                    continue
                if any(not np.array_equal(getattr(br, f), getattr(base, f)) for f in ("g", "c", "e", "is_voltage")):
                    read.add(col)
            out[kind_name] = read
        return out

    # ----------------------------------------------------------------- let values
    def _let_tree(self, qualified: str):
        tree = self.net.exprs.get(("let", qualified))
        return None if tree is None else tree[1]

    def _resolve_name(self, name: str, prefix: str) -> str | None:
        parts = prefix.split(".")[:-1] if prefix else []
        for k in range(len(parts), -1, -1):
            cand = ".".join(parts[:k] + [name]) if k else name
            if cand in self.net.values:
                return cand
        return None

    def _lets_in(self, tree, prefix: str, seen=None) -> set[str]:
        """Every let value a tree uses, directly or through other lets."""
        from ..language.expressions import names_in

        seen = set() if seen is None else seen
        out: set[str] = set()
        for n in names_in(tree):
            q = self._resolve_name(n, prefix)
            if q is None or q in seen:
                continue
            seen.add(q)
            out.add(q)
            sub = self._let_tree(q)
            if sub is not None:
                out |= self._lets_in(sub, q.rpartition(".")[0] + "." if "." in q else "", seen)
        return out

    def _tree_matches(self, tree, stored) -> bool:
        """Whether a property's tree, at the file's values, gives the stored value (not derived)."""
        if stored is None or isinstance(stored, str) or _is_nan(stored):
            return False
        try:
            val = float(self._tree_expr(tree, "", numeric=True))
        except (TypeError, ValueError, ZeroDivisionError):
            return False
        return math.isclose(val, float(stored), rel_tol=1e-9, abs_tol=1e-300)

    def _let_expr(self, qualified: str, numeric: bool):
        key = (qualified, numeric)
        if key not in self._let_cache:
            if not numeric and qualified in self.kept:
                self._let_cache[key] = self.kept[qualified].symbol
            else:
                tree = self._let_tree(qualified)
                prefix = qualified.rpartition(".")[0] + "." if "." in qualified else ""
                if tree is None:
                    self._let_cache[key] = _rational(self.net.values[qualified][0])
                else:
                    self._let_cache[key] = self._tree_expr(tree, prefix, numeric)
        return self._let_cache[key]

    def _tree_expr(self, tree, prefix: str, numeric: bool = False):
        """A value tree as a sympy expression: kept lets are symbols (unless ``numeric``)."""
        import sympy

        from ..units import lookup_unit

        tag = tree[0]
        if tag == "q":
            return _rational(tree[1].value)
        if tag == "name":
            q = self._resolve_name(tree[1], prefix)
            if q is not None:
                return self._let_expr(q, numeric)
            unit = lookup_unit(tree[1])
            if unit is None:
                raise ValueError(tree[1])
            return _rational(unit.value)
        if tag == "neg":
            return -self._tree_expr(tree[1], prefix, numeric)
        if tag == "call":
            args = [self._tree_expr(a, prefix, numeric) for a in tree[3]]
            fn = {"sqrt": sympy.sqrt, "abs": sympy.Abs, "min": sympy.Min, "max": sympy.Max}[tree[1]]
            return fn(*args)
        left = self._tree_expr(tree[1], prefix, numeric)
        right = self._tree_expr(tree[2], prefix, numeric)
        if tag == "add":
            return left + right
        if tag == "sub":
            return left - right
        if tag == "mul":
            return left * right
        if tag == "div":
            return left / right
        if tag == "pow":
            return left**right
        raise ValueError(tag)

    # ----------------------------------------------------------------- stamps
    def _stamps(self) -> None:
        """Symbolic g, c, e for every branch from the kinds' own ``branches``."""
        import sympy

        from ..kinds import KINDS

        net, bt = self.net, self.bt
        kept_lets = {n for n, k in self.kept.items() if k.source == "let"}
        n = bt.n_elements
        g = np.empty(n, dtype=object)
        c = np.empty(n, dtype=object)
        e = np.empty(n, dtype=object)
        reached: dict[str, list[str]] = {name: [] for name in self.kept}
        unsafe: dict[str, list[str]] = {}  # places whose stamp would depend on the let in a way not followed
        read = self._columns_read() if kept_lets else {}
        for kind_name, (pos, cols) in bt.groups.items():
            kind = KINDS[kind_name]
            sym_cols: dict[str, np.ndarray] = {}
            for col, arr in cols.items():
                spec = kind.props.get(col)
                if spec is None or spec.form != "quantity":
                    sym_cols[col] = arr
                    continue
                out = np.empty(len(arr), dtype=object)
                for k, p in enumerate(pos):
                    el = net.elements[p]
                    prop_key = f"{el.name}.{col}"
                    value = arr[k]
                    if prop_key in self.kept:
                        out[k] = self.kept[prop_key].symbol
                        reached[prop_key].append(prop_key)
                        continue
                    tree = net.exprs.get(("element", el.name, col)) if kept_lets else None
                    lets = self._lets_in(tree, "") & kept_lets if tree is not None else set()
                    if lets:
                        matches = self._tree_matches(tree, el.values.get(col))
                        if matches:
                            out[k] = self._tree_expr(tree, "")
                            for name in lets:
                                reached[name].append(prop_key)
                        if not matches or (
                            col not in read[kind_name] and _derives_stamp(kind, el, col, read[kind_name])
                        ):
                            for name in lets:
                                unsafe.setdefault(name, []).append(prop_key)
                        if matches:
                            continue
                    out[k] = value if _is_nan(value) else _rational(value)
                sym_cols[col] = out
            for key, tree in net.exprs.items():  # kept lets in properties that are not columns
                if (
                    key[0] == "element"
                    and kept_lets
                    and net.has_element(key[1])
                    and net.element(key[1]).kind == kind_name
                ):
                    if key[2] not in cols:
                        for name in self._lets_in(tree, "") & kept_lets:
                            reached[name].append(f"{key[1]}.{key[2]}")
                            if _derives_stamp(kind, net.element(key[1]), key[2], read[kind_name]):
                                unsafe.setdefault(name, []).append(f"{key[1]}.{key[2]}")
            br = kind.branches(sym_cols)
            mismatch = np.flatnonzero(np.asarray(br.is_voltage, dtype=bool) != bt.is_voltage[pos])
            if len(mismatch):
                p = pos[mismatch[0]]
                raise InputError(
                    f"{bt.names[p]} is {'an ideal connection' if bt.is_voltage[p] else 'resistive'} at the file's values, "
                    "but not with its kept symbol",
                    hint="keep only values that are not zero in the file (a zero resistance makes an ideal link)",
                    element=bt.names[p],
                )
            for k, p in enumerate(pos):
                g[p] = _exact(br.g[k])
                c[p] = _exact(br.c[k])
                e[p] = _exact(br.e[k])
        # every kept symbol must reach the stamps
        present: set = set()
        for arr in (g, c, e):
            for x in arr:
                if isinstance(x, sympy.Basic):
                    present |= x.free_symbols
        for name, places in unsafe.items():
            where = sorted(set(places))
            example = next((w for w in where if w.endswith(".r")), where[0]).rsplit(".", 1)[0] + ".r"
            raise InputError(
                f"'{name}' enters {', '.join(where[:4])}, from which the element's kind derives the value it stamps "
                "(as a cable derives its resistance from its length, or from a resistance per length); "
                "dcnet does not follow a symbol through that",
                hint=f"keep the derived value instead, e.g. --keep {example}, or use the let value only where it is the stamped value",
            )
        for name, k in self.kept.items():
            if k.symbol in present:
                continue
            if k.source == "property":
                el_name, _, prop = name.rpartition(".")
                raise InputError(
                    f"'{name}' does not enter the circuit equations (a {net.element(el_name).kind}'s stamp does not read its {prop})",
                    hint="keep a value that changes currents or voltages: a resistance, an EMF or a current",
                    element=el_name,
                )
            where = sorted(set(reached.get(name, [])))
            if where:
                raise InputError(
                    f"'{name}' does not enter the circuit equations (it is used only by {', '.join(where[:4])})",
                    hint="keep a value that changes currents or voltages: a resistance, an EMF or a current",
                )
            raise InputError(
                f"'{name}' is used by no element of the circuit"
                + (" that dcnet can follow (values inside blocks are not followed)" if "." in name else ""),
                hint="keep a let value that an element property uses, or an element property such as A1.r",
            )
        # exact parallel duplicates of ideal branches: the symbolic EMFs must agree too
        if bt.shadow is not None and bt.shadow.any():
            for p in np.flatnonzero(bt.shadow):
                r = bt.representative[p]
                sign = 1 if bt.a[p] == bt.a[r] else -1
                if sympy.simplify(sign * e[p] - e[r]) != 0:
                    raise InputError(
                        f"{bt.names[p]} and {bt.names[r]} are ideal and in parallel with equal values in the file, "
                        "but their kept symbols differ",
                        hint="keep the same symbol for both, or give one of them a resistance",
                        culprits=(bt.names[p], bt.names[r]),
                    )
        self.g, self.c, self.e = g, c, e

    # ----------------------------------------------------------------- quantities
    def parse_quantity(self, spec: str) -> _Quantity:
        from .solution import QuantityError

        sol = self.sol
        try:
            label, value, unit = sol.quantity(spec)
        except QuantityError as exc:
            raise UnknownNameError(
                str(exc), hint="quantities: ELEMENT.current, ELEMENT.voltage, ELEMENT.power, NODE.potential, NODE,NODE"
            ) from None
        spec = spec.strip()
        bal = sol.balance
        vscale = max(float(np.abs(sol.potentials).max(initial=0.0)), self.bt.max_emf, 1e-300)
        if "," in spec:
            a, b = (s.strip() for s in spec.split(",", 1))
            return _Quantity(spec, label, "V", "between", a, b, value, max(abs(value), vscale))
        name, _, attr = spec.rpartition(".")
        if attr in ("current", "voltage", "power") and self.net.has_element(name):
            scale = {
                "current": max(abs(value), bal.get("current_scale_A", 0.0)),
                "voltage": max(abs(value), vscale),
                "power": max(abs(value), bal.get("power_scale_W", 0.0)),
            }[attr]
            return _Quantity(spec, label, unit, attr, name, "", value, scale)
        if attr == "potential" or (not attr or label.endswith(".potential")):
            node = name if attr == "potential" else spec
            return _Quantity(spec, label, "V", "potential", node, "", value, max(abs(value), vscale))
        raise InputError(
            f"'{spec}' is a derived result; formulas cover currents, voltages, powers and potentials",
            hint=f"ask for {name}.current, {name}.voltage or {name}.power",
        )

    # ----------------------------------------------------------------- estimate
    def estimate(self, max_terms: int) -> None:
        """Refuse up front when the denominator may be too large: the number of spanning
        trees of the network with every symbol-free branch and ideal connection contracted
        bounds its number of terms."""
        import sympy

        bt = self.bt
        n = bt.n_nodes
        parent = list(range(n))

        def find(x):
            while parent[x] != x:
                parent[x] = parent[parent[x]]
                x = parent[x]
            return x

        symbolic = np.array([isinstance(x, sympy.Basic) and bool(x.free_symbols) for x in self.g], dtype=bool)
        for p in range(bt.n_elements):
            joins = bt.is_voltage[p] or (not symbolic[p] and self.g[p] != 0)
            if joins:
                ra, rb = find(bt.a[p]), find(bt.b[p])
                if ra != rb:
                    parent[ra] = rb
        groups: dict[int, int] = {}
        for x in range(n):
            groups.setdefault(find(x), len(groups))
        ground = groups[find(bt.ground)]
        m = len(groups)
        self.symbolic_nodes = m - 1
        if m <= 1:
            self.term_bound = 1.0
            return
        L = np.zeros((m, m))
        uses: dict = {}  # symbol -> how many branches between groups carry it
        for p in np.flatnonzero(symbolic & ~bt.is_voltage):
            i, j = groups[find(bt.a[p])], groups[find(bt.b[p])]
            if i == j:
                continue
            L[i, i] += 1
            L[j, j] += 1
            L[i, j] -= 1
            L[j, i] -= 1
            for s in self.g[p].free_symbols:
                uses[s] = uses.get(s, 0) + 1
        keep_idx = [k for k in range(m) if k != ground]
        sign, logdet = np.linalg.slogdet(L[np.ix_(keep_idx, keep_idx)]) if keep_idx else (1.0, 0.0)
        trees = float(np.exp(logdet)) if sign > 0 else 1.0
        # a symbol shared by several branches merges terms: its degree is at most its count
        # (and the number of groups less one), which bounds the monomials too
        degrees = float(np.prod([min(k, m - 1) + 1.0 for k in uses.values()])) if uses else 1.0
        bound = min(trees, degrees)
        self.term_bound = bound
        if bound > max_terms:
            raise LimitError(
                f"this request is too large for a closed form: the denominator may have about {bound:,.0f} terms "
                f"(limit {max_terms:,}), from {len(self.kept)} kept symbols on {m - 1} connected groups of nodes",
                hint="keep fewer symbols (kept: " + ", ".join(self.kept) + ")",
            )

    # ----------------------------------------------------------------- the solve
    def solve(self) -> None:
        """Solve the symbolic system once, for the circuit's sources and a unit injection
        (which equivalents use); keeps polynomial numerators and one denominator."""
        self._assemble()
        self._classify()
        self._reduce()
        self._fraction_free()

    def _assemble(self) -> None:
        import sympy

        from .mna import triplets

        bt = self.bt
        rows, cols, vals, z, row, vb, N = triplets(bt, self.g, self.c, self.e)
        size = len(z)
        A: dict[tuple[int, int], Any] = {}
        for i, j, v in zip(rows.tolist(), cols.tolist(), vals, strict=True):
            v = _exact(v)
            A[(i, j)] = A.get((i, j), sympy.Integer(0)) + v
        self.A = {k: v for k, v in A.items() if v != 0}
        self.z = [_exact(x) for x in z]
        self.row = row
        self.vb = vb
        self.N = N
        self.n = size
        # conductance generators: symbols that enter every stamp as 1/s
        self.gens: list = []
        self.back: dict = {}  # generator -> expression in the kept symbol
        sub: dict = {}
        stamp_values = [
            x for arr in (self.g, self.c, self.e) for x in arr if isinstance(x, sympy.Basic) and x.free_symbols
        ]
        for k in self.kept.values():
            s = k.symbol
            G = sympy.Dummy(f"G_{k.pyname}", positive=True)
            ok = True
            for x in stamp_values:
                if s in x.free_symbols:
                    _, den = sympy.fraction(sympy.together(x.xreplace({s: 1 / G})))
                    if den.has(G):
                        ok = False
                        break
            if ok and any(s in x.free_symbols for x in self.g if isinstance(x, sympy.Basic)):
                sub[s] = 1 / G
                self.gens.append(G)
                self.back[G] = 1 / s
            else:
                self.gens.append(s)
        if sub:
            self.A = {
                k: sympy.together(v.xreplace(sub)) if isinstance(v, sympy.Basic) else v for k, v in self.A.items()
            }
            self.z = [sympy.together(v.xreplace(sub)) if v.free_symbols else v for v in self.z]
            self.g = np.array([sympy.together(x.xreplace(sub)) if x.free_symbols else x for x in self.g], dtype=object)
            self.c = np.array([sympy.together(x.xreplace(sub)) if x.free_symbols else x for x in self.c], dtype=object)
        for v in list(self.A.values()) + self.z + list(self.g) + list(self.c):
            if v.free_symbols and not v.is_rational_function(*self.gens):
                raise InputError(
                    f"a kept symbol enters the circuit through a function dcnet cannot carry into a formula ({v})",
                    hint="sqrt, abs, min and max of kept values give no rational formula; keep the value they produce instead",
                )

    def _classify(self) -> None:
        """Which generators appear in the matrix; which unknowns hold no symbol at all."""
        gens = self.gens
        in_matrix = set()
        for v in self.A.values():
            in_matrix |= v.free_symbols
        for v in self.z:
            den = v.as_numer_denom()[1]
            in_matrix |= den.free_symbols
        self.mgens = [x for x in gens if x in in_matrix]
        self.rgens = [x for x in gens if x not in in_matrix]
        n = self.n
        symbolic_unknown = np.zeros(n, dtype=bool)
        for (i, j), v in self.A.items():
            if v.free_symbols:
                symbolic_unknown[i] = symbolic_unknown[j] = True
        mset = set(self.mgens)
        for i, v in enumerate(self.z):
            if v.free_symbols & mset:
                symbolic_unknown[i] = True
        # an ideal branch's current stays with the symbolic part when either of its nodes does
        N, bt = self.N, self.bt
        changed = True
        while changed:
            changed = False
            for k, p in enumerate(self.vb):
                u = N + k
                if symbolic_unknown[u]:
                    continue
                ends = [self.row[bt.a[p]], self.row[bt.b[p]]]
                if any(r >= 0 and symbolic_unknown[r] for r in ends):
                    symbolic_unknown[u] = True
                    changed = True
        self.keep_idx = np.flatnonzero(symbolic_unknown)
        self.elim_idx = np.flatnonzero(~symbolic_unknown)
        self.size = len(self.keep_idx)

    def _rhs_columns(self):
        """Right-hand side split by monomials in the RHS-only generators, plus the unit
        injection column (filled by equivalents)."""
        import sympy

        cols: dict[tuple, list] = {}
        rg = self.rgens
        for i, v in enumerate(self.z):
            if v == 0:
                continue
            if rg and v.free_symbols & set(rg):
                poly = sympy.Poly(sympy.expand(v.as_numer_denom()[0]), *rg)
                den = v.as_numer_denom()[1]
                for monom, coeff in poly.terms():
                    cols.setdefault(monom, [sympy.Integer(0)] * self.n)[i] = (
                        coeff.as_expr() / den if hasattr(coeff, "as_expr") else coeff / den
                    )
            else:
                cols.setdefault((0,) * len(rg), [sympy.Integer(0)] * self.n)[i] = v
        self.monomials = list(cols)
        self.rhs = [cols[m] for m in self.monomials]

    def set_injection(self, x: str, y: str) -> None:
        """Also solve for a unit current injected into node x and drawn out of node y with
        every source zeroed (the Thevenin resistance); read it with ``column="injection"``."""
        self.injection_nodes = (x, y)

    def _injection_column(self):
        import sympy

        col = [sympy.Integer(0)] * self.n
        idx = self.net.node_index
        for node, sign in zip(self.injection_nodes, (1, -1), strict=True):
            r = self.row[idx[node]]
            if r >= 0:
                col[r] += sign
        return col

    def _reduce(self) -> None:
        """Eliminate the symbol-free unknowns (Schur complement); keep Y for back-substitution."""
        import sympy
        from sympy import QQ

        self._rhs_columns()
        columns = self.rhs + ([self._injection_column()] if getattr(self, "injection_nodes", None) else [])
        self.n_cols = len(columns)
        keep, elim = self.keep_idx, self.elim_idx
        pos_k = {int(i): k for k, i in enumerate(keep)}
        A = self.A
        if len(elim) == 0:
            self.S = {(pos_k[i], pos_k[j]): v for (i, j), v in A.items()}
            self.R = [[col[i] for i in keep] for col in columns]
            self.Y = None
            return
        pos_e = {int(i): k for k, i in enumerate(elim)}
        ne, nk = len(elim), len(keep)
        Ann: dict = {}
        Ans: dict = {}
        Asn: dict = {}
        Ass: dict = {}
        for (i, j), v in A.items():
            if i in pos_e and j in pos_e:
                Ann[(pos_e[i], pos_e[j])] = v
            elif i in pos_e:
                Ans[(pos_e[i], pos_k[j])] = v
            elif j in pos_e:
                Asn[(pos_k[i], pos_e[j])] = v
            else:
                Ass[(pos_k[i], pos_k[j])] = v
        # right-hand side of the eliminated block: [A_ns | Z_n]
        rhs_cols: list[list] = []
        for k in range(nk):
            rhs_cols.append([Ans.get((r, k), 0) for r in range(ne)])
        for col in columns:
            rhs_cols.append([col[int(i)] for i in elim])
        if ne <= EXACT_LIMIT:
            from sympy.polys.matrices import DomainMatrix

            M = DomainMatrix(
                {r: {c: QQ.from_sympy(v) for (rr, c), v in Ann.items() if rr == r} for r in range(ne)}, (ne, ne), QQ
            )
            B = DomainMatrix(
                [[QQ.from_sympy(sympy.sympify(rhs_cols[c][r])) for c in range(len(rhs_cols))] for r in range(ne)],
                (ne, len(rhs_cols)),
                QQ,
            )
            Y = M.to_dense().lu_solve(B.to_dense()).to_Matrix()
            Yl = [[Y[r, c] for c in range(len(rhs_cols))] for r in range(ne)]
        else:
            Mf = np.zeros((ne, ne)) if ne <= 3000 else None
            Bf = np.array([[float(rhs_cols[c][r]) for c in range(len(rhs_cols))] for r in range(ne)])
            if Mf is not None:
                for (r, c), v in Ann.items():
                    Mf[r, c] = float(v)
                Yf = np.linalg.solve(Mf, Bf)
            else:
                from scipy.sparse import csc_matrix
                from scipy.sparse.linalg import splu

                keys = list(Ann)
                Ms = csc_matrix(
                    ([float(Ann[k]) for k in keys], ([k[0] for k in keys], [k[1] for k in keys])), shape=(ne, ne)
                )
                Yf = splu(Ms, permc_spec="MMD_AT_PLUS_A").solve(Bf)
            colmax = np.abs(Yf).max(axis=0, initial=0.0)
            Yf[np.abs(Yf) <= 1e-14 * colmax] = 0.0
            Yl = [
                [_rational(Yf[r, c]) if Yf[r, c] != 0 else sympy.Integer(0) for c in range(Yf.shape[1])]
                for r in range(ne)
            ]
        self.Y = Yl
        # S = A_ss - A_sn Y1 ; R = Z_s - A_sn Y2
        by_row: dict[int, list] = {}
        for (r, c), v in Asn.items():
            by_row.setdefault(r, []).append((c, v))
        S = dict(Ass)
        R = [[col[int(i)] for i in keep] for col in columns]
        for r, items in by_row.items():
            for k in range(nk):
                acc = sum((v * Yl[c][k] for c, v in items), sympy.Integer(0))
                if acc != 0:
                    S[(r, k)] = S.get((r, k), sympy.Integer(0)) - acc
            for m in range(len(columns)):
                acc = sum((v * Yl[c][nk + m] for c, v in items), sympy.Integer(0))
                if acc != 0:
                    R[m][r] = R[m][r] - acc
        self.S = {k: v for k, v in S.items() if v != 0}
        self.R = R

    def _fraction_free(self) -> None:
        """Row-scale to ZZ[matrix generators] and solve fraction-free (``solve_den``)."""
        import sympy
        from sympy import QQ, ZZ
        from sympy.polys.matrices import DomainMatrix

        nk = len(self.keep_idx)
        mg = self.mgens
        K = QQ.frac_field(*mg) if mg else QQ
        dom = ZZ[tuple(mg)] if mg else ZZ
        ring_q = QQ[tuple(mg)] if mg else QQ
        rows_S: list[dict] = [dict() for _ in range(nk)]
        for (r, c), v in self.S.items():
            rows_S[r][c] = v
        n_cols = self.n_cols
        mat: dict[int, dict[int, Any]] = {}
        rhs: dict[int, dict[int, Any]] = {}
        for r in range(nk):
            entries = [(c, K.from_sympy(v)) for c, v in rows_S[r].items()]
            rentries = [(m, K.from_sympy(sympy.sympify(self.R[m][r]))) for m in range(n_cols) if self.R[m][r] != 0]
            if mg:
                lcm = ring_q.one
                for _, f in entries + rentries:
                    lcm = lcm.lcm(ring_q.ring.from_dict(dict(f.denom))) if f.denom != 1 else lcm
                scaled = [
                    (c, ring_q.ring.from_dict(dict(f.numer)) * lcm.exquo(ring_q.ring.from_dict(dict(f.denom))))
                    for c, f in entries
                ]
                rscaled = [
                    (m, ring_q.ring.from_dict(dict(f.numer)) * lcm.exquo(ring_q.ring.from_dict(dict(f.denom))))
                    for m, f in rentries
                ]
                dens = [QQ.denom(co) for _, p in scaled + rscaled for co in p.values()]
                mult = 1
                for d in dens:
                    mult = mult * int(d) // math.gcd(mult, int(d))
                conv = lambda p, mult=mult: dom.ring.from_dict({k: ZZ(int((v * mult).numerator)) for k, v in p.items()})  # noqa: E731
                mat[r] = {c: conv(p) for c, p in scaled if p}
                rhs[r] = {m: conv(p) for m, p in rscaled if p}
            else:
                mult = 1
                for _, f in entries + rentries:
                    mult = mult * int(QQ.denom(f)) // math.gcd(mult, int(QQ.denom(f)))
                mat[r] = {c: ZZ(int((f * mult).numerator)) for c, f in entries if f}
                rhs[r] = {m: ZZ(int((f * mult).numerator)) for m, f in rentries if f}
        self.dom = dom
        if nk == 0:
            self.xnum = []
            self.den = dom.one
            return
        M = DomainMatrix({r: row for r, row in mat.items() if row}, (nk, nk), dom)
        B = DomainMatrix({r: row for r, row in rhs.items() if row}, (nk, n_cols), dom)
        try:
            xnum, den = M.solve_den(B)
        except Exception as exc:  # noqa: BLE001 - sympy raises its own errors for singular systems
            raise NumericalError(
                f"the symbolic circuit matrix is singular ({type(exc).__name__})",
                hint="the numeric solve succeeded; please report this circuit",
            ) from None
        self.xnum = xnum.to_list()
        self.den = den

    # ----------------------------------------------------------------- results as fractions
    def _ring(self):
        from sympy import QQ

        if not hasattr(self, "_Rall"):  # at least one symbol is kept, so there is a generator
            self._Rall = QQ[tuple(self.mgens + self.rgens)].ring
        return self._Rall

    def _lift(self, p):
        """A ZZ[matrix gens] polynomial (or integer) into QQ[all gens]."""
        from sympy import QQ

        R = self._ring()
        nr = len(self.rgens)
        if not hasattr(p, "items"):
            return R(QQ(int(p)))
        return R.from_dict({exp + (0,) * nr: QQ(int(v)) for exp, v in p.items()}) if p else R.zero

    def _monomial(self, m):
        from sympy import QQ

        R = self._ring()
        return R.from_dict({(0,) * len(self.mgens) + tuple(m): QQ(1)})

    def _from_expr(self, v):
        """An exact sympy expression in the generators as (numerator, denominator) in QQ[all gens]."""
        import sympy

        R = self._ring()
        num, den = sympy.fraction(sympy.together(sympy.sympify(v)))
        return R.from_expr(num), R.from_expr(den)

    def unknown(self, u: int, column: str = "circuit"):
        """Unknown ``u`` (a row of the full system) as (numerator, denominator) polynomials."""
        from sympy import QQ

        zero = self._ring().zero
        den = self._lift(self.den)
        cols = list(range(len(self.monomials))) if column == "circuit" else [self.n_cols - 1]
        monos = (
            [self._monomial(m) for m in self.monomials]
            if column == "circuit"
            else [self._monomial((0,) * len(self.rgens))]
        )
        pos_k = {int(i): k for k, i in enumerate(self.keep_idx)}

        def kept_value(k):
            acc = zero
            for mono, col in zip(monos, cols, strict=True):
                p = self.xnum[k][col]
                if p:
                    acc += mono * self._lift(p)
            return acc

        if u in pos_k:
            return kept_value(pos_k[u]), den
        # eliminated: x_n = Y2 - Y1 x_s
        e = int(np.flatnonzero(self.elim_idx == u)[0])
        nk = len(self.keep_idx)
        row = self.Y[e]
        acc = zero
        for mono, col in zip(monos, cols, strict=True):
            y = row[nk + col]
            if y != 0:
                acc += mono * QQ.from_sympy(y) * den
        for k in range(nk):
            y = row[k]
            if y != 0:
                acc -= QQ.from_sympy(y) * kept_value(k)
        return acc, den

    def potential(self, node: str, column: str = "circuit"):
        R = self._ring()
        r = self.row[self.net.node_index[node]]
        if r < 0:  # ground
            return R.zero, R.one
        return self.unknown(int(r), column)

    def between(self, a: str, b: str, column: str = "circuit"):
        na, da = self.potential(a, column)
        nb, db = self.potential(b, column)
        if da == db:
            return na - nb, da
        return na * db - nb * da, da * db

    def current(self, name: str):
        bt = self.bt
        p = self.net.element_position(name)
        rep, share, sign = p, 1, 1
        if bt.representative is not None:
            # exact parallel duplicates of ideal branches share their group's current equally
            rep = int(bt.representative[p])
            share = int((bt.representative == rep).sum())
            sign = 1 if bt.a[p] == bt.a[rep] else -1
        if bt.is_voltage[rep]:
            k = int(np.flatnonzero(self.vb == rep)[0])
            num, den = self.unknown(self.N + k)
        else:
            v_num, v_den = self.between(bt.node_names[bt.a[rep]], bt.node_names[bt.b[rep]])
            gn, gd = self._from_expr(self.g[rep])
            cn, cd = self._from_expr(self.c[rep])
            num = gn * v_num * cd + cn * gd * v_den
            den = gd * cd * v_den
        if share != 1 or sign != 1:
            from sympy import QQ

            num = num * QQ(sign, share)
        return num, den

    def voltage(self, name: str):
        p = self.net.element_position(name)
        return self.between(self.bt.node_names[self.bt.a[p]], self.bt.node_names[self.bt.b[p]])

    def fraction(self, q: _Quantity):
        if q.what == "potential":
            return self.potential(q.a)
        if q.what == "between":
            return self.between(q.a, q.b)
        if q.what == "current":
            return self.current(q.a)
        if q.what == "voltage":
            return self.voltage(q.a)
        vn, vd = self.voltage(q.a)
        inum, iden = self.current(q.a)
        return vn * inum, vd * iden

    # ----------------------------------------------------------------- readable form
    def readable(self, num, den):
        """Cancel once, turn conductances back into the kept resistances, factor.
        Returns (coefficient, numerator, denominator, expr) as sympy objects."""
        import sympy

        if not num:
            z = sympy.Integer(0)
            return z, z, sympy.Integer(1), z
        num, den = num.cancel(den)
        syms = self.mgens + self.rgens
        # conductance generators back to resistances: multiply both by s^d, d the highest degree
        flips = [k for k, s in enumerate(syms) if s in self.back]
        target_syms = [(1 / self.back[s]) if s in self.back else s for s in syms]
        if flips:
            deg = {
                k: max(max((e[k] for e in num.keys()), default=0), max((e[k] for e in den.keys()), default=0))
                for k in flips
            }

            def flip(p):
                out = {}
                for exp, co in p.items():
                    exp = list(exp)
                    for k in flips:
                        exp[k] = deg[k] - exp[k]
                    out[tuple(exp)] = co
                return out

            num_d, den_d = flip(num), flip(den)
        else:
            num_d, den_d = dict(num), dict(den)
        from sympy import QQ

        Ru = QQ[tuple(target_syms)].ring
        pn, pd = Ru.from_dict(num_d), Ru.from_dict(den_d)
        cn, fn = self._factored(pn)
        cd, fd = self._factored(pd)
        coeff = sympy.Rational(QQ.to_sympy(cn)) / sympy.Rational(QQ.to_sympy(cd))
        expr = coeff * (fn / fd)  # (a number times a lone sum would be distributed over it)
        return coeff, fn, fd, expr

    def _factored(self, p):
        """:func:`_factored`, remembered: the quantities of one request mostly share their
        denominator, and factoring is the slowest step."""
        import sympy

        ring = p.ring
        mono = tuple(min(e[k] for e in p.keys()) for k in range(ring.ngens)) if p else ()
        monomial = sympy.Integer(1)
        if any(mono):  # quantities' denominators differ by such monomials (r_j of their own branch)
            p = ring.from_dict({tuple(a - b for a, b in zip(e, mono, strict=True)): c for e, c in p.items()})
            for s, k in zip(ring.symbols, mono, strict=True):
                monomial *= s**k
        key = tuple(sorted(p.items()))
        cache = self.__dict__.setdefault("_factor_cache", {})
        if key not in cache:
            cache[key] = _factored(p)
        content, out = cache[key]
        return content, monomial * out

    def formula(self, q: _Quantity, fraction=None) -> Formula:
        num, den = self.fraction(q) if fraction is None else fraction
        coeff, fn, fd, expr = self.readable(num, den)
        kept = tuple(self.kept.values())
        f = _checked(q, expr, fn, fd, coeff, kept)
        f.notes = tuple(self.notes)
        return f


def _factored(p):
    """(rational content, product of normalised factors) of a polynomial ring element."""
    import sympy
    from sympy import QQ

    if len(p) > FACTOR_LIMIT:
        lc = _lead(p)
        return lc, (p.quo_ground(lc)).as_expr()
    content, factors = p.factor_list()
    out = sympy.Integer(1)
    for f, k in factors:
        lc = _lead(f)
        content = content * lc**k
        out = out * f.quo_ground(lc).as_expr() ** k
    return QQ.convert(content), out


def _lead(p):
    """The number a factor is divided by to read well: the magnitude of the coefficient of its
    highest-degree term (graded order), signed so that most of its terms come out positive."""
    best = max(p.items(), key=lambda t: (sum(t[0]), t[0]))[1]
    positive = sum(1 for c in p.values() if (c > 0) == (best > 0))
    return best if 2 * positive >= len(p) else -best


def _numeric_function(syms, expr):
    """``sympy.lambdify`` to numpy; for a formula too large for Python's compiler (a sum of
    thousands of terms nests too deeply), an evaluator that walks the expression without
    recursion instead. Both take the kept values positionally and broadcast over arrays."""
    import sympy

    try:
        return sympy.lambdify(syms, expr, modules="numpy")
    except RecursionError:
        return _TreeEvaluator(syms, expr)


class _TreeEvaluator:
    """Evaluates a sympy expression of sums, products, powers, symbols and numbers over numpy
    arrays, visiting the tree with an explicit stack (no recursion, any size)."""

    def __init__(self, syms, expr):
        import sympy

        self.index = {s: k for k, s in enumerate(syms)}
        self.expr = expr
        self.sympy = sympy

    def __call__(self, *args):
        sympy = self.sympy
        values = {}
        stack = [(self.expr, False)]
        while stack:
            node, ready = stack.pop()
            if node in values:
                continue
            if node.is_Symbol:
                values[node] = np.asarray(args[self.index[node]], dtype=float)
            elif node.is_Number:
                values[node] = float(node)
            elif not ready:
                stack.append((node, True))
                stack.extend((a, False) for a in node.args if a not in values)
            else:
                parts = [values[a] for a in node.args]
                if isinstance(node, sympy.Add):
                    out = parts[0]
                    for p in parts[1:]:
                        out = out + p
                elif isinstance(node, sympy.Mul):
                    out = parts[0]
                    for p in parts[1:]:
                        out = out * p
                elif isinstance(node, sympy.Pow):
                    out = np.power(parts[0], parts[1])
                else:
                    raise TypeError(f"cannot evaluate {type(node).__name__} numerically")
                values[node] = out
        return values[self.expr]


def _checked(q: _Quantity, expr, fn, fd, coeff, kept) -> Formula:

    syms = [k.symbol for k in kept]
    f = _numeric_function(syms, expr) if syms else None
    try:
        value = float(f(*[k.nominal for k in kept])) if f is not None else float(expr)
    except (TypeError, ZeroDivisionError, OverflowError):
        value = float("nan")
    dev = abs(value - q.solved) / q.scale if q.scale > 0 else abs(value - q.solved)
    if not (dev <= AGREEMENT):
        raise NumericalError(
            f"the formula for {q.label} gives {value:.10g} {q.unit} at the file's values, but the numeric solve gives "
            f"{q.solved:.10g} {q.unit}; it is not shown",
            hint="this is a fault in dcnet; please report the circuit",
        )
    return Formula(q.spec, q.label, q.unit, expr, fn, fd, coeff, tuple(kept), value, q.solved, dev, f)


# --------------------------------------------------------------------------- rendering


def _display_numbers(expr, digits: int, python: bool = False):
    """Non-integer rationals as floats rounded to ``digits`` significant figures."""
    import sympy

    if not isinstance(expr, sympy.Basic):
        return expr
    reps = {}
    for r in expr.atoms(sympy.Rational):
        if r.is_Integer:
            continue
        x = float(r)
        reps[r] = sympy.Float(float(f"{x:.{digits}g}") if not python else x, 17 if python else 15)
    return expr.xreplace(reps) if reps else expr


def _render(f: Formula, how: str, digits: int) -> str:
    import sympy

    python = how == "python"
    num = _display_numbers(f.numerator, digits, python)
    den = _display_numbers(f.denominator, digits, python)
    c = sympy.sympify(f.coefficient)
    parts = []
    if c != 1 or (num == 1 and den == 1):
        if c.is_Integer:
            parts.append(c)
        else:
            x = float(c)
            parts.append(sympy.Float(x if python else float(f"{x:.{digits}g}"), 17 if python else 15))
    if num != 1:
        parts.append(num)
    if den != 1:
        parts.append(sympy.Pow(den, -1, evaluate=False))
    if not parts:
        parts = [sympy.Integer(1)]
    expr = parts[0] if len(parts) == 1 else sympy.Mul(*parts, evaluate=False)
    if how == "latex":
        names = {k.symbol: k.latex for k in f.kept}
        return sympy.latex(expr, symbol_names=names)
    if how == "python":
        names = {k.symbol: sympy.Symbol(k.pyname) for k in f.kept}
        return _PyPrinter().doprint(expr.xreplace(names))
    names = {k.symbol: sympy.Symbol(k.name) for k in f.kept}
    return _text_printer().doprint(expr.xreplace(names)) if names else _text_printer().doprint(expr)


def _text_printer():
    from sympy.printing.str import StrPrinter

    class _Text(StrPrinter):
        def _print_Float(self, expr):
            return f"{float(expr):.15g}"

    return _Text()


def _PyPrinter():
    from sympy.printing.pycode import PythonCodePrinter

    class _Py(PythonCodePrinter):
        def _print_Float(self, expr):
            return repr(float(expr))

    return _Py()
