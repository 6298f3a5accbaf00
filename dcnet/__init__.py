"""dcnet: exact, self-verifying solves of DC battery networks.

>>> import dcnet
>>> net = dcnet.parse('''
... cell A1 pos gnd emf=12.6V r=20mOhm
... load L pos gnd r=1.2Ohm
... ground gnd
... ''')
>>> sol = net.solve()
>>> round(sol.current("L"), 4)
10.3279
"""

from __future__ import annotations

from . import errors
from .analysis.solution import Solution
from .errors import DcnetError
from .language import Options, load, parse
from .netlist import Element, Netlist

__all__ = ["load", "parse", "Options", "Netlist", "Element", "Solution", "DcnetError", "errors", "__version__"]

__version__ = "0.1.0"
