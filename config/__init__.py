"""Package data of knudsweep (installed as ``knudsweep.data``): the gas table and the study schema.

The folder is the project's config/ (the demo study and the execution profiles
live here too, but only ``gases.yaml`` and ``schema.yaml`` are installed); code
reads them with :func:`importlib.resources.files`, so a regular (non-editable)
install finds them as well as a checkout.
"""
