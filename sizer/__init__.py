"""sizer: least-cost conductor sizing for whole low-voltage distribution trees.

A design aid: every result must be checked against the local electrical code and by a
licensed professional before it is built.
"""

__version__ = "0.1.0"

# The one statement of responsibility: every report, file, summary and help text shows it.
CAUTION = (
    "sizer is a design aid. Verify every result against the local electrical code and "
    "with the authority having jurisdiction; a licensed professional is responsible for "
    "the design and must review and sign it before anything is built."
)


def __getattr__(name: str):
    """``sizer.solve``, ``sizer.sweep`` and ``sizer.Results``, imported on first use.

    ``import sizer`` stays light (no numpy, pandas, pint or solver) until one is used.
    ``sizer.sweep`` is the sweep package, callable as a function that returns a
    DataFrame (see ``sizer.api.sweep``), so it means the same whether or not the
    package was imported before.
    """
    import importlib

    if name == "solve":
        return importlib.import_module("sizer.api").solve
    if name == "sweep":
        return importlib.import_module("sizer.sweep")
    if name == "Results":
        return importlib.import_module("sizer.results").Results
    raise AttributeError(f"module 'sizer' has no attribute {name!r}")
