"""Element kinds, one module each; this registry is the only list of them.

To add a kind: write ``dcnet/kinds/<name>.py`` defining ``KIND`` (a
:class:`~dcnet.kinds.base.Kind`), add the module name to ``_MODULES`` below,
and add tests under ``tests/kinds/``. See DEVELOPERS.md.
"""

from __future__ import annotations

from importlib import import_module

from .base import Branches, Kind, Prop

__all__ = ["KINDS", "Kind", "Prop", "Branches", "get"]

_MODULES = ("resistor", "cell", "source", "supply", "cable", "fuse", "switch", "link", "load", "diode")

KINDS: dict[str, Kind] = {}
for _m in _MODULES:
    _kind = import_module(f"{__name__}.{_m}").KIND
    KINDS[_kind.name] = _kind


def get(name: str) -> Kind | None:
    return KINDS.get(name)
