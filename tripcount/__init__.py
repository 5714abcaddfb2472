"""tripcount: exact work, working-set and balance formulas for affine C loop nests."""

__version__ = "0.1.0"
