"""Evaluation of value expressions with units and dimension checks.

Expression trees come from :func:`dcnet.language.parser.parse_value` as tuples:
``("q", Quantity, col, len)``, ``("name", text, col, len)``,
``("call", fname, col, [args])`` and ``(op, left, right)`` / ``("neg", x)``.
Columns are 1-based within the raw value text.
"""

from __future__ import annotations

import math

from ..errors import DimensionError, UnknownNameError, ValueRangeError
from ..units import DIMENSIONLESS, Quantity, dim_name, lookup_unit

__all__ = ["evaluate", "evaluate_array", "names_in", "ExpressionProblem", "MAX_MAGNITUDE", "MIN_MAGNITUDE"]

#: results beyond this magnitude are refused as overflow
MAX_MAGNITUDE = 1e100
#: non-zero results below this magnitude are refused as underflow (and so is a product or
#: quotient of non-zero values that comes out zero): nothing physical in a DC network is that
#: small in SI units, and such values (subnormal floats among them) would only turn into
#: infinities inside the solve (1 / 1e-320 overflows)
MIN_MAGNITUDE = 1e-100

_UNDERFLOW = "the value underflows (too small to be a physical quantity)"


class ExpressionProblem(Exception):
    """An evaluation problem located at a column of the raw value; the caller adds the file span."""

    def __init__(self, error_class, message: str, column: int, length: int = 1, hint: str | None = None):
        super().__init__(message)
        self.error_class, self.message, self.column, self.length, self.hint = error_class, message, column, length, hint


def names_in(tree) -> set[str]:
    """Every name used in an expression tree."""
    out: set[str] = set()
    stack = [tree]
    while stack:
        node = stack.pop()
        if not isinstance(node, tuple):
            continue
        tag = node[0]
        if tag == "name":
            out.add(node[1])
        elif tag == "call":
            stack.extend(node[3])
        elif tag != "q":
            stack.extend(x for x in node[1:] if isinstance(x, tuple))
    return out


def _column(node) -> int:
    tag = node[0]
    if tag in ("q", "name", "call"):
        return node[2]
    if tag == "neg":
        return _column(node[1])
    return _column(node[1])


def _check_finite(value: float, node, *operands: float) -> float:
    """``value`` if it is a finite number of physical size; ``operands`` (of a product, quotient
    or power) tell an underflow to zero from a true zero."""
    if not math.isfinite(value) or abs(value) > MAX_MAGNITUDE:
        raise ExpressionProblem(ValueRangeError, "the value overflows (too large to be a physical quantity)", _column(node))
    if (value != 0 and abs(value) < MIN_MAGNITUDE) or (value == 0 and operands and all(x != 0 for x in operands)):
        raise ExpressionProblem(ValueRangeError, _UNDERFLOW, _column(node))
    return value


def _lookup_name(tree, env, suggest=None) -> Quantity:
    """A name in an expression: a named value first, then a unit (so ``3.3 Ohm/km`` works)."""
    name = tree[1]
    if name in env:
        return env[name]
    unit = lookup_unit(name)
    if unit is not None:
        return unit
    near = suggest(name) if suggest else None
    hint = f"did you mean '{near}'?" if near else "define it first with: let NAME = VALUE"
    raise ExpressionProblem(UnknownNameError, f"unknown name '{name}'", tree[2], tree[3], hint)


def evaluate(tree, env: dict[str, Quantity], suggest=None) -> Quantity:
    """Evaluate an expression tree against named values ``env``.

    Names resolve to ``env`` first, then to units (so ``3.3 Ohm/km`` works).
    """
    tag = tree[0]
    if tag == "q":
        return tree[1]
    if tag == "name":
        return _lookup_name(tree, env, suggest)
    if tag == "neg":
        q = evaluate(tree[1], env, suggest)
        return Quantity(-q.value, q.dim)
    if tag == "call":
        return _call(tree, [evaluate(a, env, suggest) for a in tree[3]])
    left = evaluate(tree[1], env, suggest)
    right = evaluate(tree[2], env, suggest)
    if tag in ("add", "sub"):
        if left.dim != right.dim:
            raise ExpressionProblem(
                DimensionError,
                f"cannot {'add' if tag == 'add' else 'subtract'} {dim_name(right.dim)} and {dim_name(left.dim)}",
                _column(tree[2]),
                hint="both sides of + or - need the same unit kind",
            )
        v = left.value + right.value if tag == "add" else left.value - right.value
        return Quantity(_check_finite(v, tree), left.dim)
    if tag == "mul":
        return Quantity(_check_finite(left.value * right.value, tree, left.value, right.value), _combine(left.dim, right.dim, 1))
    if tag == "div":
        if right.value == 0:
            raise ExpressionProblem(ValueRangeError, "division by zero", _column(tree[2]))
        return Quantity(_check_finite(left.value / right.value, tree, left.value), _combine(left.dim, right.dim, -1))
    if tag == "pow":
        if right.dim != DIMENSIONLESS:
            raise ExpressionProblem(DimensionError, "an exponent must be a plain number", _column(tree[2]))
        p = right.value
        if left.dim != DIMENSIONLESS and p != int(p):
            raise ExpressionProblem(DimensionError, "a quantity with a unit can only be raised to a whole power", _column(tree[2]))
        if abs(p) > 1000:
            raise ExpressionProblem(ValueRangeError, "the exponent is too large", _column(tree[2]))
        try:
            v = left.value**p
        except (OverflowError, ZeroDivisionError):
            raise ExpressionProblem(ValueRangeError, "the power overflows or divides by zero", _column(tree[1])) from None
        if isinstance(v, complex):
            raise ExpressionProblem(ValueRangeError, "a negative number to a fractional power", _column(tree[1]))
        return Quantity(_check_finite(v, tree, left.value), tuple(int(d * p) for d in left.dim))
    raise AssertionError(tag)  # pragma: no cover


def _combine(a, b, sign):
    return tuple(x + sign * y for x, y in zip(a, b))


_FUNCS = ("sqrt", "min", "max", "abs")


def _call(tree, args: list[Quantity]) -> Quantity:
    fname, col = tree[1], tree[2]
    if fname not in _FUNCS:
        import difflib

        near = difflib.get_close_matches(fname, _FUNCS, n=1)
        hint = f"did you mean '{near[0]}'?" if near else "functions: sqrt, min, max, abs"
        raise ExpressionProblem(UnknownNameError, f"unknown function '{fname}'", col, len(fname), hint)
    if fname in ("sqrt", "abs") and len(args) != 1:
        raise ExpressionProblem(ValueRangeError, f"{fname} takes one argument, got {len(args)}", col, len(fname))
    if fname == "abs":
        return Quantity(abs(args[0].value), args[0].dim)
    if fname == "sqrt":
        q = args[0]
        if any(d % 2 for d in q.dim):
            raise ExpressionProblem(DimensionError, f"cannot take the square root of {dim_name(q.dim)}", col, len(fname))
        if q.value < 0:
            raise ExpressionProblem(ValueRangeError, "square root of a negative value", col, len(fname))
        return Quantity(math.sqrt(q.value), tuple(d // 2 for d in q.dim))
    dims = {a.dim for a in args}
    if len(dims) != 1:
        raise ExpressionProblem(DimensionError, f"{fname} needs arguments of one unit kind", col, len(fname))
    pick = min if fname == "min" else max
    return Quantity(pick(a.value for a in args), args[0].dim)


# ----------------------------------------------------------------- studies
def evaluate_array(tree, env) -> Quantity:
    """Evaluate a tree whose named values may be numpy arrays (one entry per sample of a study).

    The same rules as :func:`evaluate`: dimensions are checked once for all samples; range
    problems (division by zero, overflow, the square root of a negative value, a negative
    number to a fractional power) are raised for the first sample that has them, with the
    sample's index in the message. Scalar-only inputs give the same floats as :func:`evaluate`.
    """
    import numpy as np

    tag = tree[0]
    if tag == "q":
        return tree[1]
    if tag == "name":
        return _lookup_name(tree, env)
    if tag == "neg":
        q = evaluate_array(tree[1], env)
        return Quantity(-q.value, q.dim)
    if tag == "call":
        return _call_array(tree, [evaluate_array(a, env) for a in tree[3]])
    left = evaluate_array(tree[1], env)
    right = evaluate_array(tree[2], env)
    with np.errstate(all="ignore"):
        if tag in ("add", "sub"):
            if left.dim != right.dim:
                raise ExpressionProblem(
                    DimensionError,
                    f"cannot {'add' if tag == 'add' else 'subtract'} {dim_name(right.dim)} and {dim_name(left.dim)}",
                    _column(tree[2]),
                )
            v = left.value + right.value if tag == "add" else left.value - right.value
            return Quantity(_finite_array(v, tree), left.dim)
        if tag == "mul":
            return Quantity(_finite_array(left.value * right.value, tree, left.value, right.value), _combine(left.dim, right.dim, 1))
        if tag == "div":
            _refuse_where(np.asarray(right.value) == 0, ValueRangeError, "division by zero", _column(tree[2]))
            return Quantity(_finite_array(left.value / right.value, tree, left.value), _combine(left.dim, right.dim, -1))
        if tag == "pow":
            if right.dim != DIMENSIONLESS:
                raise ExpressionProblem(DimensionError, "an exponent must be a plain number", _column(tree[2]))
            p = np.asarray(right.value)
            if left.dim != DIMENSIONLESS:
                if p.ndim and not np.all(p == p.flat[0]):
                    raise ExpressionProblem(DimensionError, "a quantity with a unit needs the same whole power in every sample", _column(tree[2]))
                p0 = float(p.flat[0]) if p.ndim else float(p)
                if p0 != int(p0):
                    raise ExpressionProblem(DimensionError, "a quantity with a unit can only be raised to a whole power", _column(tree[2]))
            _refuse_where(np.abs(p) > 1000, ValueRangeError, "the exponent is too large", _column(tree[2]))
            base = np.asarray(left.value)
            _refuse_where((base == 0) & (p < 0), ValueRangeError, "the power overflows or divides by zero", _column(tree[1]))
            _refuse_where((base < 0) & (p != np.floor(p)), ValueRangeError, "a negative number to a fractional power", _column(tree[1]))
            v = left.value**right.value
            dim = left.dim if left.dim == DIMENSIONLESS else tuple(int(d * (p.flat[0] if p.ndim else p)) for d in left.dim)
            return Quantity(_finite_array(v, tree, left.value), dim)
    raise AssertionError(tag)  # pragma: no cover


def _first(mask) -> int | None:
    import numpy as np

    mask = np.asarray(mask)
    if not mask.any():
        return None
    return int(np.flatnonzero(mask.ravel())[0]) if mask.ndim else 0


def _refuse_where(mask, error_class, message: str, column: int) -> None:
    k = _first(mask)
    if k is not None:
        where = f" (sample {k + 1})" if getattr(mask, "ndim", 0) else ""
        raise ExpressionProblem(error_class, message + where, column)


def _finite_array(v, node, *operands):
    import numpy as np

    arr = np.asarray(v)
    _refuse_where(~np.isfinite(arr) | (np.abs(arr) > MAX_MAGNITUDE), ValueRangeError, "the value overflows (too large to be a physical quantity)", _column(node))
    tiny = (arr != 0) & (np.abs(arr) < MIN_MAGNITUDE)
    if operands:
        nonzero = np.ones(arr.shape, dtype=bool)
        for x in operands:
            nonzero = nonzero & (np.asarray(x) != 0)
        tiny = tiny | ((arr == 0) & nonzero)
    _refuse_where(tiny, ValueRangeError, _UNDERFLOW, _column(node))
    return v


def _call_array(tree, args: list[Quantity]) -> Quantity:
    import numpy as np

    fname, col = tree[1], tree[2]
    if fname not in _FUNCS or (fname in ("sqrt", "abs") and len(args) != 1):
        return _call(tree, args)  # the scalar path words the error
    if fname == "abs":
        return Quantity(np.abs(args[0].value) if isinstance(args[0].value, np.ndarray) else abs(args[0].value), args[0].dim)
    if fname == "sqrt":
        q = args[0]
        if any(d % 2 for d in q.dim):
            raise ExpressionProblem(DimensionError, f"cannot take the square root of {dim_name(q.dim)}", col, len(fname))
        _refuse_where(np.asarray(q.value) < 0, ValueRangeError, "square root of a negative value", col)
        value = np.sqrt(q.value) if isinstance(q.value, np.ndarray) else math.sqrt(q.value)
        return Quantity(value, tuple(d // 2 for d in q.dim))
    dims = {a.dim for a in args}
    if len(dims) != 1:
        raise ExpressionProblem(DimensionError, f"{fname} needs arguments of one unit kind", col, len(fname))
    if not any(isinstance(a.value, np.ndarray) for a in args):
        return _call(tree, args)
    pick = np.minimum if fname == "min" else np.maximum
    out = args[0].value
    for a in args[1:]:
        out = pick(out, a.value)
    return Quantity(out, args[0].dim)
