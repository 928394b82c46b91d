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
