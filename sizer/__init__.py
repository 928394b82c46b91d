"""sizer: least-cost conductor sizing for whole low-voltage distribution trees.

A design aid: every result must be checked against the local electrical code and by a
licensed professional before it is built.
"""

__version__ = "0.1.0"

CAUTION = (
    "Design aid only: check every result against the local electrical code and have a "
    "licensed professional review and sign the design."
)
