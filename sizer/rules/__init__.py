"""Rule profiles (NEC, CEC, IEC) as data, and the pure rule functions that apply them.

``load_profile("nec")`` gives a frozen RuleProfile; the functions of ``ampacity`` and
``protection`` take it first and work on numpy arrays of size indices and currents.
"""

from sizer.rules.ampacity import (
    REL_TOL,
    ambient_factor,
    ampacity_a,
    ampacity_ok,
    grouping_factor,
    table_ampacity_a,
    unadjusted_ampacity_a,
)
from sizer.rules.profile import (
    INSTALLATIONS,
    PROFILES,
    RuleProfile,
    TerminalRule,
    check_material,
    load_profile,
    read_profile,
)
from sizer.rules.protection import (
    NO_SIZE,
    egc_size_index,
    egc_size_index_of_sizes,
    min_parallel_ok,
    next_standard_rating_a,
    protects,
    size_index_of_area,
    small_conductor_ok,
    terminal_temperature_c,
)

__all__ = [
    "INSTALLATIONS",
    "NO_SIZE",
    "PROFILES",
    "REL_TOL",
    "RuleProfile",
    "TerminalRule",
    "ambient_factor",
    "ampacity_a",
    "ampacity_ok",
    "check_material",
    "egc_size_index",
    "egc_size_index_of_sizes",
    "grouping_factor",
    "load_profile",
    "min_parallel_ok",
    "next_standard_rating_a",
    "protects",
    "read_profile",
    "size_index_of_area",
    "small_conductor_ok",
    "table_ampacity_a",
    "terminal_temperature_c",
    "unadjusted_ampacity_a",
]
