"""Data tables (conductors, chemistries) as commented text files, each row with its source."""

from __future__ import annotations

from functools import lru_cache
from importlib import resources

__all__ = ["read_table", "metals"]


def read_table(name: str, columns: int) -> list[list[str]]:
    """Rows of a whitespace-separated data file; the last column takes the rest of the line."""
    text = resources.files(__package__).joinpath(name).read_text(encoding="utf-8")
    rows = []
    for line in text.splitlines():
        line = line.strip()
        if not line or line.startswith("#"):
            continue
        rows.append(line.split(None, columns - 1))
    return rows


@lru_cache(maxsize=None)
def metals() -> dict[str, tuple[float, float, str]]:
    """``name -> (resistivity in ohm·m at 20 °C, temperature coefficient 1/K, source)``."""
    table = {}
    for name, rho, alpha, source in read_table("metals.tsv", 4):
        table[name] = (float(rho) * 1e-6, float(alpha), source)
    return table
