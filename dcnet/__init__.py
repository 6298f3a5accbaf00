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
from .analysis.equivalent import Equivalent, equivalent
from .analysis.solution import Solution
from .analysis.symbolic import Formula, formulas
from .errors import DcnetError
from .language import Options, load, parse
from .netlist import Element, Netlist

__all__ = [
    "load",
    "parse",
    "Options",
    "Netlist",
    "Element",
    "Solution",
    "formulas",
    "Formula",
    "equivalent",
    "Equivalent",
    "DcnetError",
    "errors",
    "__version__",
]

__version__ = "0.1.0"
