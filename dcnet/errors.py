"""One exception hierarchy for everything dcnet refuses.

Every error is a :class:`DcnetError`. Errors about the input carry where the
problem is (file, line, column, span length) and the source line itself, so the
command line can print ``file:line:col: message``, the line with a caret under
the span, and a hint. All fields are plain data and every class pickles
cleanly, because errors cross process boundaries in folder runs.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = [
    "Span",
    "DcnetError",
    "InputError",
    "SyntaxError",
    "UnknownNameError",
    "DimensionError",
    "ValueRangeError",
    "IncludeError",
    "LimitError",
    "TopologyError",
    "NumericalError",
    "ConvergenceError",
    "NoOperatingPointError",
    "RunError",
    "DcnetWarning",
]


@dataclass(frozen=True, slots=True)
class Span:
    """Where a statement or token stands in a circuit file (1-based line and column)."""

    file: str = "<text>"
    line: int = 0
    column: int = 0
    length: int = 1

    def __str__(self) -> str:
        if self.line:
            return f"{self.file}:{self.line}:{self.column}"
        return self.file


class DcnetError(Exception):
    """Root of every error dcnet raises on purpose.

    Fields are keyword arguments kept as attributes; the message is built in
    ``__str__`` so that it survives pickling.
    """

    kind = "error"

    def __init__(
        self,
        message: str,
        *,
        span: Span | None = None,
        hint: str | None = None,
        source_line: str | None = None,
        element: str | None = None,
        node: str | None = None,
        culprits: tuple[str, ...] = (),
    ) -> None:
        super().__init__(message)
        self.message = message
        self.span = span
        self.hint = hint
        self.source_line = source_line
        self.element = element
        self.node = node
        self.culprits = tuple(culprits)

    def __reduce__(self):
        return (
            _rebuild,
            (
                type(self),
                self.message,
                {
                    "span": self.span,
                    "hint": self.hint,
                    "source_line": self.source_line,
                    "element": self.element,
                    "node": self.node,
                    "culprits": self.culprits,
                },
            ),
        )

    # Convenience accessors for the location fields.
    @property
    def file(self) -> str | None:
        return self.span.file if self.span else None

    @property
    def line(self) -> int | None:
        return self.span.line if self.span else None

    @property
    def column(self) -> int | None:
        return self.span.column if self.span else None

    def __str__(self) -> str:
        where = f"{self.span}: " if self.span else ""
        return f"{where}{self.message}"

    def render(self) -> str:
        """The full message for people: location, message, source line, caret, hint.

        Control characters and bidi controls anywhere in it (a title, a file name, the echoed
        line) are shown as visible escapes (``\\x1b``, ``\\u202e``); the caret stands under the
        span as shown."""
        from .display import shown

        lines = [shown(str(self))]
        if self.source_line is not None and self.span and self.span.column:
            text = self.source_line.rstrip("\r\n").expandtabs(1)
            col = max(self.span.column, 1)
            length = max(1, min(self.span.length, max(1, len(text) - col + 1)))
            before = len(shown(text[: col - 1])) + max(0, col - 1 - len(text))
            under = len(shown(text[col - 1 : col - 1 + length])) or length
            lines.append("    " + shown(text))
            lines.append("    " + " " * before + "^" * under)
        if self.culprits:
            lines.append(shown("  involved: " + ", ".join(self.culprits)))
        if self.hint:
            lines.append(shown(f"  hint: {self.hint}"))
        return "\n".join(lines)

    def with_span(self, span: Span, source_line: str | None = None) -> DcnetError:
        """Attach a location if the error has none yet; returns self."""
        if self.span is None:
            self.span = span
            if source_line is not None:
                self.source_line = source_line
        return self


def _rebuild(cls, message, fields):
    return cls(message, **fields)


class InputError(DcnetError):
    """Something in the circuit text is wrong."""


class SyntaxError(InputError):  # noqa: A001 - our own, deliberately shadows the builtin name here
    """The text does not follow the grammar."""


class UnknownNameError(InputError):
    """A kind, property, unit, value, part or node name that is not defined."""


class DimensionError(InputError):
    """A value has the wrong physical dimension."""


class ValueRangeError(InputError):
    """A value is zero, negative, not finite or otherwise outside what physics allows."""


class IncludeError(InputError):
    """An include that cannot be followed (missing file, cycle, outside the tree)."""


class LimitError(InputError):
    """An input exceeds a safety limit on size or depth."""


class TopologyError(DcnetError):
    """The circuit cannot be solved as connected (floating parts, ideal-source loops...)."""


class NumericalError(DcnetError):
    """The numeric solve failed or did not verify."""


class ConvergenceError(NumericalError):
    """An iterative (nonlinear) solve did not settle."""


class NoOperatingPointError(NumericalError):
    """A nonlinear circuit has no operating point (e.g. a constant-power demand above what the network can deliver)."""


class RunError(DcnetError):
    """The work could not be carried out where it was sent (a worker died, a cluster was lost)."""


class DcnetWarning(UserWarning):
    """A condition worth telling the user that does not stop the solve."""
