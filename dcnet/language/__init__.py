"""The circuit language: text to :class:`~dcnet.netlist.Netlist`."""

from .elaborate import LIMIT_RULES, Options, load, parse

__all__ = ["load", "parse", "Options", "LIMIT_RULES"]
