"""The one writer of every output file, and the checks made before any work.

Inputs are sacred: every file a run reads (the scenario, its CSV schedule and head, the
price list) is protected by its resolved path and by its inode, so no spelling, symbolic
link or hard link makes an output overwrite it. Every output path is checked before any
work (a folder, a device, a missing or unwritable folder, two outputs naming one file,
an input named as an output). Every output is written to a unique temporary file created
exclusively in the target's folder (``tempfile.mkstemp``: ``O_CREAT | O_EXCL``, so a link
planted at a temporary name is never followed) and renamed into place only when every
output of the run is complete: the outputs of a run appear together or not at all.
"""

from __future__ import annotations

import contextlib
import os
import stat
import tempfile
from collections.abc import Iterable, Sequence
from pathlib import Path
from types import TracebackType

from sizer.errors import ScenarioError

__all__ = ["Protected", "ScenarioError", "Staged", "check_outputs", "run_inputs", "write_file"]


# What a protected file is, in the one-line refusal.
SCENARIO = "the input scenario"
SCHEDULE = "the input CSV schedule"
PRICE_LIST = "the input price list"
DATA_TABLE = "data sizer reads (a rule profile, catalogue, price list or demo scenario)"
INPUT = "an input of this run"


def _refused(label: str, shown: str) -> ScenarioError:
    return ScenarioError(f"refusing to overwrite {label}", file=shown)


def _resolved(path: str | os.PathLike[str]) -> Path:
    try:
        return Path(path).resolve()
    except (OSError, RuntimeError):  # a link loop: compare the path as written
        return Path(os.path.abspath(path))


def _inode(path: Path) -> tuple[int, int] | None:
    try:
        st = os.stat(path)
    except (OSError, ValueError):
        return None
    return (st.st_dev, st.st_ino)


class Protected:
    """Files that must never be written: matched by resolved path and by inode."""

    def __init__(self, paths: Iterable[str | os.PathLike[str]] = (),
                 label: str = INPUT) -> None:
        self.paths: dict[Path, str] = {}
        self.inodes: dict[tuple[int, int], str] = {}
        self.add(paths, label)

    def add(self, paths: Iterable[str | os.PathLike[str]], label: str = INPUT) -> Protected:
        """Protect these files too; ``label`` says what they are in a refusal."""
        for p in paths:
            resolved = _resolved(p)
            self.paths.setdefault(resolved, label)
            inode = _inode(resolved)
            if inode is not None:
                self.inodes.setdefault(inode, label)
        return self

    def holds(self, path: str | os.PathLike[str]) -> str | None:
        """What writing ``path`` would overwrite (its label), or None."""
        resolved = _resolved(path)
        if resolved in self.paths:
            return self.paths[resolved]
        inode = _inode(resolved)
        return self.inodes.get(inode) if inode is not None else None


def protected(protect: Protected | Iterable[str | os.PathLike[str]]) -> Protected:
    """``protect`` as a Protected set (paths given bare are inputs of the run)."""
    return protect if isinstance(protect, Protected) else Protected(protect)




def _probe(folder: Path, shown: str) -> None:
    """Create and remove a temporary file in ``folder``: the only sure test of writing."""
    try:
        fd, tmp = tempfile.mkstemp(prefix=".sizer-probe.", suffix=".tmp", dir=folder)
    except OSError as exc:
        raise ScenarioError(f"cannot write in its folder: {exc.strerror or exc}",
                            file=shown) from None
    os.close(fd)
    os.unlink(tmp)


def check_output(path: str | os.PathLike[str], guard: Protected) -> Path:
    """The resolved target of one output, or a one-line ScenarioError naming it."""
    shown = os.fspath(path)
    if not shown.strip():
        raise ScenarioError("an output needs a file name", file=repr(shown))
    if "\0" in shown:
        raise ScenarioError("a file name cannot contain a NUL character", file=repr(shown))
    label = guard.holds(shown)
    if label:
        raise _refused(label, shown)
    target = _resolved(shown)
    try:
        st = os.stat(target)
    except FileNotFoundError:
        st = None
    except OSError as exc:
        raise ScenarioError(f"cannot be written: {exc.strerror or exc}", file=shown) from None
    if st is not None and stat.S_ISDIR(st.st_mode):
        raise ScenarioError("is a folder, not a file name", file=shown)
    if st is not None and not stat.S_ISREG(st.st_mode):
        raise ScenarioError("is not a regular file (a device, pipe or socket)", file=shown)
    if not target.parent.is_dir():
        raise ScenarioError("its folder does not exist", file=shown)
    _probe(target.parent, shown)
    return target


def check_outputs(named: Sequence[tuple[str, str | os.PathLike[str]]],
                  protect: Protected | Iterable[str | os.PathLike[str]] = ()) -> list[Path]:
    """Check every output of a run before any work; their resolved targets.

    ``named`` pairs each output's option (``--json``) with its path. Refuses in one line
    an input named as an output, a folder, a device, a missing or unwritable folder and
    two outputs naming one file.
    """
    guard = protected(protect)
    targets: list[Path] = []
    seen: dict[object, str] = {}
    for option, path in named:
        target = check_output(path, guard)
        for key in (target, _inode(target)):
            if key is None:
                continue
            if key in seen:
                raise ScenarioError(f"is named twice as an output ({seen[key]} and {option})",
                                    file=os.fspath(path))
            seen[key] = option
        targets.append(target)
    return targets


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


class Staged:
    """The outputs of one run: each staged complete, then all renamed at the end.

    Use as a context manager: on a normal exit every staged file is renamed into place
    (a failed rename puts back the files already replaced); on an exception, or when a
    signal turned into one, every temporary file is removed and no output changes.
    """

    def __init__(self, protect: Protected | Iterable[str | os.PathLike[str]] = ()) -> None:
        self.protected = protected(protect)
        self._pending: list[tuple[str, Path, str]] = []   # (temporary, target, shown)

    def add(self, path: str | os.PathLike[str], data: str | bytes) -> Path:
        """Write ``data`` completely to a new temporary file beside ``path``."""
        shown = os.fspath(path)
        target = check_output(shown, self.protected)
        for _, other, other_shown in self._pending:
            if other == target:
                raise ScenarioError(f"is named twice as an output (also as {other_shown})",
                                    file=shown)
        try:
            fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp",
                                       dir=target.parent)
        except OSError as exc:
            raise ScenarioError(f"cannot write: {exc.strerror or exc}", file=shown) from None
        self._pending.append((tmp, target, shown))
        try:
            # mkstemp makes the file private; give it the permissions open() would.
            os.fchmod(fd, 0o666 & ~_umask())
            with os.fdopen(fd, "wb") as fh:
                fh.write(data.encode("utf-8") if isinstance(data, str) else data)
                fh.flush()
                os.fsync(fh.fileno())
        except OSError as exc:
            raise ScenarioError(f"cannot write: {exc.strerror or exc}", file=shown) from None
        return Path(shown)

    def discard(self) -> None:
        """Remove every temporary file; no output changes."""
        for tmp, _, _ in self._pending:
            Path(tmp).unlink(missing_ok=True)
        self._pending.clear()

    def commit(self) -> None:
        """Rename every staged file into place, all or none."""
        done: list[tuple[Path, str | None]] = []   # (target, backup of the old file)
        try:
            for tmp, target, shown in self._pending:
                # Checked again: a link may have been planted since the file was staged.
                label = self.protected.holds(target) or self.protected.holds(shown)
                if label:
                    raise _refused(label, shown)
                backup: str | None = None
                if os.path.lexists(target):
                    backup = f"{tmp}.old"
                    try:
                        os.link(target, backup, follow_symlinks=False)
                    except OSError:  # no hard links here: this one cannot be put back
                        backup = ""
                try:
                    os.replace(tmp, target)
                except BaseException as exc:
                    if backup:
                        os.unlink(backup)
                    if isinstance(exc, OSError):
                        raise ScenarioError(f"cannot write: {exc.strerror or exc}",
                                            file=shown) from None
                    raise
                done.append((target, backup))
        except BaseException:
            # os.rename, not os.replace: the same call on POSIX, kept apart so a test
            # can make os.replace fail without failing the way back.
            for target, backup in reversed(done):
                if backup is None:
                    target.unlink(missing_ok=True)
                elif backup:
                    os.rename(backup, target)
            self.discard()
            raise
        for _, backup in done:
            if backup:
                Path(backup).unlink(missing_ok=True)
        self._pending.clear()

    def __enter__(self) -> Staged:
        return self

    def __exit__(self, kind: type[BaseException] | None, exc: BaseException | None,
                 tb: TracebackType | None) -> None:
        if kind is None:
            self.commit()
        else:
            self.discard()


def write_file(path: str | os.PathLike[str], data: str | bytes, *,
               protect: Protected | Iterable[str | os.PathLike[str]] = ()) -> Path:
    """Write one output whole or not at all (a run of one file)."""
    with Staged(protect) as stage:
        written = stage.add(path, data)
    return written


def run_inputs(scenario_file: str | os.PathLike[str] | None,
               scenario: object = None) -> Protected:
    """Every file a run reads, labelled for the refusal.

    The scenario as named, the head and CSV schedule it read, its price list (as written
    and as found), the bundled price lists, and the rule profiles' and catalogues' tables.
    """
    from sizer.catalogue.prices import resolve_price_list

    guard = Protected([scenario_file] if scenario_file is not None else [], SCENARIO)
    guard.add(_bundled_tables(), DATA_TABLE)
    if scenario is None:
        return guard
    read = list(getattr(scenario, "inputs", ()))
    guard.add(read[:1], SCENARIO).add(read[1:], SCHEDULE)
    given = getattr(getattr(scenario, "prices", None), "catalogue", None)
    if given is not None:
        folder = Path(getattr(scenario, "file", "") or ".").parent
        guard.add([given], PRICE_LIST)
        with contextlib.suppress(ScenarioError):  # the run says so when it reads prices
            guard.add([resolve_price_list(os.fspath(given), folder)], PRICE_LIST)
    return guard


def _bundled_tables() -> list[Path]:
    """The data sizer ships and reads: rule profiles, catalogues, price lists, scenarios."""
    from sizer.bundled import bundled_folder

    package = Path(__file__).resolve().parent
    folders = [package / "rules", package / "catalogue"]
    for name in ("costdata", "scenarios"):
        with contextlib.suppress(Exception):  # a partial install: nothing there to protect
            folders.append(bundled_folder(name))
    return sorted(p for folder in folders if folder.is_dir() for p in folder.rglob("*")
                  if p.suffix in (".toml", ".csv"))
