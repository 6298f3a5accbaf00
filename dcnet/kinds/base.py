"""What an element kind is: its property schema, its branch model and its results.

Every kind is one :class:`Kind` instance in one module of this package. The
language layer reads ``props`` to resolve and validate values; the assembly
reads :meth:`Kind.branches`; the results layer reads :meth:`Kind.extras` and
:meth:`Kind.state`. Nothing else in dcnet needs to know a kind by name.

The branch model
----------------
Each element is one branch from its first node ``a`` to its second node ``b``,
with passive-sign current ``i`` (through the element from a to b) and voltage
``v = V(a) - V(b)``. A linear branch is one of two forms:

* admittance form: ``i = g * v + c`` (resistors; cells and sources with internal
  resistance as Norton equivalents, ``c = -emf * g``; current sources, ``g = 0``);
* voltage form: ``v = e`` with ``i`` an extra unknown (ideal sources and links).

``branches`` returns, for all elements of the kind at once (numpy arrays, one
entry per element), ``is_voltage``, ``g``, ``c`` and ``e``. Because it is plain
array arithmetic, the same function serves float arrays, batched sample arrays
and sympy object arrays.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np

from ..errors import ValueRangeError
from ..units import Dim

__all__ = ["Prop", "Kind", "Branches", "positive", "nonnegative", "finite", "check_samples", "check_finished", "above_absolute_zero"]

#: magnitudes a value may have (SI); the language refuses expressions beyond them
#: (dcnet.language.expressions.MAX_MAGNITUDE / MIN_MAGNITUDE); values a kind derives are held to the same
MAX_MAGNITUDE = 1e100
MIN_MAGNITUDE = 1e-100
ABSOLUTE_ZERO_C = -273.15


def finite(name: str, x: float) -> None:
    m = abs(x)
    if MIN_MAGNITUDE <= m <= MAX_MAGNITUDE or m == 0:  # the common case first (NaN fails both)
        return
    if not math.isfinite(x):
        raise ValueRangeError(f"{name}={x} is not a finite number")
    raise ValueRangeError(f"{name}={x:g} is too {'large' if m > 1 else 'small'} to be a physical quantity")


def above_absolute_zero(name: str, x: float) -> None:
    """A temperature in degrees Celsius above absolute zero."""
    finite(name, x)
    if x <= ABSOLUTE_ZERO_C:
        raise ValueRangeError(f"{name}={x:g} degC is at or below absolute zero ({ABSOLUTE_ZERO_C} degC)")


def check_finished(values: dict[str, Any], given=()) -> dict[str, Any]:
    """Every number an element ends with (given, or derived by its kind's ``finish``) is finite
    and of physical size; a derived resistance ``r`` is greater than zero. Returns ``values``."""
    for key, x in values.items():
        if type(x) is float or (isinstance(x, (float, int)) and not isinstance(x, bool)):
            m = abs(x)
            if (MIN_MAGNITUDE <= m <= MAX_MAGNITUDE or m == 0) and (key != "r" or x > 0 or key in given):
                continue  # the common case, without a call
            derived = key not in given
            try:
                finite(key, float(x))
                if derived and key == "r" and not x > 0:
                    raise ValueRangeError(f"r={x:g} Ohm is not a resistance greater than zero")
            except ValueRangeError as err:
                if derived:
                    err.message += " (derived from the element's other values)"
                raise
    return values


def positive(name: str, x: float) -> None:
    finite(name, x)
    if x <= 0:
        raise ValueRangeError(f"{name} must be greater than zero, got {x:g}")


def nonnegative(name: str, x: float) -> None:
    finite(name, x)
    if x < 0:
        raise ValueRangeError(f"{name} must not be negative, got {x:g}")


@dataclass(frozen=True)
class Prop:
    """One property of a kind.

    ``form`` is ``"quantity"`` (an expression with a unit of dimension ``dim``),
    ``"word"`` (one of ``words``, or any word when ``words`` is empty),
    ``"words"`` (a comma-separated list) or ``"gauge"`` (an AWG number).
    """

    name: str
    dim: Dim | None = None
    form: str = "quantity"
    required: bool = False
    default: Any = None
    words: tuple[str, ...] = ()
    check: Callable[[str, float], None] | None = finite
    doc: str = ""


@dataclass
class Branches:
    """Branch model of all elements of one kind (arrays of equal length)."""

    is_voltage: np.ndarray
    g: np.ndarray
    c: np.ndarray
    e: np.ndarray
    #: conductance an element leaks while the model holds it open (g = 0): NaN where none.
    #: It is not stamped; it only places parts that open elements cut off (analysis/islands.py)
    leak: np.ndarray | None = None


@dataclass
class Kind:
    """An element kind. Subclass and override the methods that differ."""

    name: str
    doc: str
    props: dict[str, Prop] = field(default_factory=dict)
    #: properties whose values become float columns for vectorised use
    columns: tuple[str, ...] = ()
    #: True for kinds whose first node is a positive source terminal
    is_source: bool = False
    #: nonlinear kinds are solved by Newton iterations (see analysis.newton)
    nonlinear: bool = False
    #: the word for a non-source element that carries current
    busy_word: str = "conducting"

    def finish(self, values: dict[str, Any]) -> dict[str, Any]:
        """Check combinations of properties and derive values; return the final dict.

        Raise :class:`~dcnet.errors.InputError` subclasses (without a span; the
        language layer adds it).
        """
        return values

    def branches(self, cols: dict[str, np.ndarray]) -> Branches:
        raise NotImplementedError

    def finish_batch(self, values: dict[str, Any], varied: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
        """:meth:`finish` for many samples at once (studies: dcnet sweep and spread).

        ``values`` are one element's finished values; ``varied`` maps the properties a study
        changes, as written (before anything is derived from them), to one value per sample.
        Returns every value that changes, one per sample. The default suits kinds whose
        ``finish`` derives nothing from quantities: each property is checked for every sample
        (its ``Prop.check``), and ``finish`` runs on the samples holding each property's
        extremes, which catches its range rules. Kinds that derive values override it.
        """
        out = {key: check_samples(self.props[key], key, arr) for key, arr in varied.items()}
        for arr in list(out.values()):
            for k in {int(np.nanargmin(arr)), int(np.nanargmax(arr))}:
                trial = dict(values)
                trial.update({key: float(a[k]) for key, a in out.items()})
                try:
                    check_finished(self.finish(trial), given=trial.keys() & self.props.keys())
                except ValueRangeError as err:
                    err.message += f" (sample {k + 1})"
                    raise
        return out

    # ------------------------------------------------------- nonlinear kinds
    # A kind whose elements (some or all) are nonlinear answers these; the Newton solver
    # (analysis/newton.py) calls them on the nonlinear elements only, as arrays.

    def nonlinear_mask(self, cols: dict[str, np.ndarray]) -> np.ndarray:
        """Which elements of this kind need the nonlinear solver (default: none)."""
        n = len(next(iter(cols.values()))) if cols else 0
        return np.full(n, self.nonlinear, dtype=bool)

    def initial_mode(self, cols: dict[str, np.ndarray]) -> np.ndarray:
        """Operating mode of each nonlinear element before the first iteration (integer codes)."""
        n = len(next(iter(cols.values()))) if cols else 0
        return np.zeros(n, dtype=np.int64)

    def companion(self, cols, v: np.ndarray, i: np.ndarray, mode: np.ndarray, prev: np.ndarray, itol: float = 0.0):
        """Linear model at the operating point: returns (Branches, new mode, voltage used).

        ``v``/``i`` are the latest iterate's branch voltage and current, ``prev`` the
        voltage the previous model was built at; a kind may limit the step (junctions) and
        switch modes (piecewise-linear kinds). The returned voltage is what it linearised at.
        ``itol`` is the round-off of the iterate's currents (amperes): a current switching
        rule does not switch on a current within ``itol`` of its threshold.
        """
        raise NotImplementedError

    def settled_modes(self, cols, v: np.ndarray, mode: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """At a point where Newton has settled: (the modes, where no operating point of the
        element lies at this voltage). A kind switches a mode that has a successor (Newton
        goes on from there) and marks one that has none (the point is not accepted as an
        answer). By default every mode stands."""
        return mode, np.zeros(len(mode), dtype=bool)

    def exact_current(self, cols, v: np.ndarray, i: np.ndarray, mode: np.ndarray) -> np.ndarray:
        """The element law evaluated at voltage ``v`` (``i`` is the solved current, used by
        voltage-form modes whose current is an unknown of the system)."""
        raise NotImplementedError

    def extras(self, cols: dict[str, np.ndarray], v: np.ndarray, i: np.ndarray, ctx: dict) -> dict[str, np.ndarray]:
        """Kind-specific results beside current, voltage and power."""
        return {}

    def state(self, cols: dict[str, np.ndarray], v: np.ndarray, i: np.ndarray) -> np.ndarray:
        """A plain word per element: what it is doing.

        Sources say delivering or absorbing (by the sign of their power); other
        kinds say conducting; any element with no current is idle (the solve sets currents
        within its round-off bound to zero).
        """
        idle = i == 0
        if self.is_source:
            busy = np.where(v * i < 0, "delivering", "absorbing")
        else:
            busy = np.full(len(i), self.busy_word, dtype=object)
        return np.where(idle, "idle", busy)


def check_samples(spec: Prop, key: str, arr: np.ndarray) -> np.ndarray:
    """Apply a property's check to every sample (its extremes and any value that is not finite)."""
    arr = np.asarray(arr, dtype=float)
    if spec.check is None or not arr.size:
        return arr
    bad = np.flatnonzero(~np.isfinite(arr))
    picks = [int(bad[0])] if len(bad) else [int(np.argmin(arr)), int(np.argmax(arr))]
    for k in picks:
        try:
            spec.check(key, float(arr[k]))
        except ValueRangeError as err:
            err.message += f" (sample {k + 1})"
            raise
    return arr


def admittance(g: np.ndarray, c: Any = 0.0) -> Branches:
    """Admittance-form branches ``i = g*v + c`` for all elements of a kind."""
    g = np.asarray(g)
    dtype = object if _is_object(np.asarray(c)) else g.dtype  # symbolic c beside numeric g
    c = np.broadcast_to(np.asarray(c, dtype=dtype), g.shape).copy()
    return Branches(is_voltage=np.zeros(g.shape, dtype=bool), g=g, c=c, e=np.zeros(g.shape, dtype=g.dtype))


def _is_object(x: Any) -> bool:
    return isinstance(x, np.ndarray) and x.dtype == object


def mixed(is_voltage: np.ndarray, g: np.ndarray, c: np.ndarray, e: np.ndarray) -> Branches:
    return Branches(is_voltage=np.asarray(is_voltage, dtype=bool), g=g, c=c, e=e)


def safe_inverse(r: np.ndarray, use: np.ndarray) -> np.ndarray:
    """1/r where ``use`` is true, 0 elsewhere (no warnings for the unused entries)."""
    if _is_object(r):
        return np.array([1 / x if u else 0 for x, u in zip(r, use)], dtype=object)
    out = np.zeros(len(r))
    np.divide(1.0, r, out=out, where=use)
    return out


def resistive_mask(r: np.ndarray) -> np.ndarray:
    """True where a resistance is given and positive; absent (NaN) or zero means an ideal connection.

    Symbolic (object) arrays are decided entry by entry; an entry whose sign sympy cannot decide
    counts as resistive. The symbolic layer (analysis/symbolic.py) takes the structure from the
    numeric netlist and refuses a symbolic model that disagrees with it.
    """
    if _is_object(r):
        return np.array([_positive(x) for x in r], dtype=bool)
    return r > 0


def present(x: np.ndarray) -> np.ndarray:
    """True where an optional property is given (not NaN); also for symbolic (object) arrays."""
    if _is_object(x):
        return np.array([not (isinstance(v, float) and v != v) for v in x], dtype=bool)
    return ~np.isnan(x)


def _positive(x: Any) -> bool:
    if isinstance(x, float) and x != x:
        return False
    try:
        return bool(x > 0)
    except TypeError:  # a symbolic value of undecided sign
        return True
