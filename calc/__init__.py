"""relsheet: plain-text sheets of physical quantities for relativistic and
celestial-mechanics corrections.

Public API::

    from calc import Sheet
    sheet = Sheet.load("orbit.sheet")
    sheet["adv"]                  # an astropy Quantity
    sheet.set("e", "0.21")        # the cells whose value changed
"""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["Sheet", "Cell", "SheetError", "__version__"]


def __getattr__(name: str):
    # imported lazily so that `relsheet --help` does not load astropy
    if name in ("Sheet", "Cell"):
        from .engine import sheet

        return getattr(sheet, name)
    if name == "SheetError":
        from .errors import SheetError

        return SheetError
    raise AttributeError(f"module 'calc' has no attribute {name!r}")
