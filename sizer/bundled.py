"""Where the bundled data folders are: inside an installed wheel, or in a source checkout.

``costdata/`` (price lists) and ``scenarios/`` (demo sites) live at the top of the
repository; a wheel carries them as ``sizer/costdata`` and ``sizer/scenarios``.
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

BUNDLED_FOLDERS = ("costdata", "scenarios")


def bundled_folder(name: str) -> Path:
    """Path of a bundled data folder (``"costdata"`` or ``"scenarios"``).

    An installed wheel has it inside the package (found with ``importlib.resources``); a
    source checkout or an editable install has it beside the package.
    """
    if name not in BUNDLED_FOLDERS:
        raise ValueError(f"no bundled folder {name!r}")
    inside = Path(str(resources.files("sizer"))) / name
    if inside.is_dir():
        return inside
    return Path(__file__).resolve().parents[1] / name
