"""knudsweep study layer: config, point identity, gather, tables, figures, status, CLI.

Numerics live in the separate ``solver`` package, which never imports this one.
"""

from solver import __version__

__all__ = ["__version__"]
