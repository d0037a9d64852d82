"""knudsweep study layer: config, point identity, gather, tables, figures, status, CLI.

Numerics live in the subpackage ``knudsweep.solver`` (folder solver/), which never imports the study modules.
"""

from knudsweep.solver import __version__

__all__ = ["__version__"]
