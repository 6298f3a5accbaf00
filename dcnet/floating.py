"""Floating-point trouble in numpy, turned into dcnet's own error.

numpy reports an overflow, a division by zero or an invalid operation (``inf - inf``, ``0/0``)
as a ``RuntimeWarning`` printed with the line of dcnet's source that met it, and goes on with an
infinity or a NaN. Sound circuits never meet one (the test suite passes with these warnings as
errors; code that expects one says so with ``numpy.errstate``), so where one happens an
infinity or a NaN has entered arithmetic that nobody guarded and the answer cannot be trusted.
Inside :func:`refused` such a warning is raised instead, and :func:`as_error` words it as a
:class:`~dcnet.errors.NumericalError`: the user gets exit 2 and a message, never numpy's text.
"""

from __future__ import annotations

import re
import warnings
from contextlib import contextmanager

from .errors import NumericalError, Span

__all__ = ["refused", "as_error", "is_floating_point_warning"]

_PATTERN = r".*(overflow|divide by zero|invalid value|underflow) encountered"


def is_floating_point_warning(exc: BaseException) -> bool:
    return isinstance(exc, RuntimeWarning) and re.match(_PATTERN, str(exc)) is not None


@contextmanager
def refused():
    """numpy's floating-point warnings raised as exceptions (``RuntimeWarning``) in this block."""
    with warnings.catch_warnings():
        warnings.filterwarnings("error", message=_PATTERN, category=RuntimeWarning)
        yield


def as_error(exc: RuntimeWarning, file: str | None = None) -> NumericalError:
    """A floating-point warning as dcnet's error (``file``: the circuit it came from)."""
    m = re.match(_PATTERN, str(exc))
    what = m.group(1) if m else "floating-point problem"
    return NumericalError(
        f"the computation met a floating-point {what} ({exc}): dcnet shows no answer it cannot trust",
        span=Span(file) if file else None,
        hint="look for extreme values (a missing unit prefix, a resistance of 1e-90 Ohm, a huge current); "
        "if every value is sound, please report the circuit",
    )
