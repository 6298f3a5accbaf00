"""The circuit language: text to :class:`~dcnet.netlist.Netlist`."""

from .elaborate import LIMIT_RULES, Options, load, parse, read_stdin
from .printer import to_text

__all__ = ["load", "parse", "read_stdin", "Options", "LIMIT_RULES", "to_text"]
