"""One exception family for sizer; each error names where the trouble is."""

from __future__ import annotations


class SizerError(Exception):
    """Base of every error sizer raises on purpose."""

    exit_code = 2


class ScenarioError(SizerError, ValueError):
    """Bad input: a scenario, a field or a command-line value that cannot be used.

    The message reads ``FILE: node 'X', field 'f': what is wrong``; parts that are
    unknown are left out.
    """

    def __init__(
        self,
        message: str,
        *,
        file: str | None = None,
        node: str | None = None,
        field: str | None = None,
    ) -> None:
        self.message = message
        self.file = file
        self.node = node
        self.field = field
        super().__init__(self._text())

    def _text(self) -> str:
        where = []
        if self.node is not None:
            where.append(f"node '{self.node}'")
        if self.field is not None:
            where.append(f"field '{self.field}'")
        head = ", ".join(where)
        text = f"{head}: {self.message}" if head else self.message
        return f"{self.file}: {text}" if self.file else text

    def located(
        self, *, file: str | None = None, node: str | None = None, field: str | None = None
    ) -> ScenarioError:
        """Return a copy with the missing location parts filled in."""
        return type(self)(
            self.message,
            file=self.file or file,
            node=self.node if self.node is not None else node,
            field=self.field if self.field is not None else field,
        )

    def __reduce__(self):  # keep pickling (process pools) working with keyword fields
        return (_rebuild, (type(self), self.message, self.file, self.node, self.field))


def _rebuild(cls, message, file, node, field):
    return cls(message, file=file, node=node, field=field)


class UnitError(ScenarioError):
    """A quantity, unit or conductor size that cannot be read or does not fit its field."""


class ScenarioErrors(ScenarioError):
    """Several input errors found together; the message shows the first few."""

    def __init__(self, errors: list[ScenarioError], shown: int = 5) -> None:
        self.errors = errors
        lines = [str(e) for e in errors[:shown]]
        if len(errors) > shown:
            lines.append(f"... and {len(errors) - shown} more")
        SizerError.__init__(self, "\n".join(lines))
        self.message = lines[0] if lines else ""
        self.file = errors[0].file if errors else None
        self.node = errors[0].node if errors else None
        self.field = errors[0].field if errors else None

    def __str__(self) -> str:
        return str(self.args[0])

    def __reduce__(self):
        return (ScenarioErrors, (self.errors,))


class InfeasibleError(SizerError):
    """No design satisfies the rules; carries the diagnosis lines."""

    exit_code = 1

    def __init__(self, message: str, diagnosis: list[str] | None = None) -> None:
        self.diagnosis = diagnosis or []
        super().__init__(message)


class SolverError(SizerError, RuntimeError):
    """The optimisation solver is missing or failed; the message names the fix."""


class InternalError(SizerError, RuntimeError):
    """sizer itself went wrong: not the user's input, so exit code 3 and "please report".

    A broken invariant, misuse of an engine, a load flow that does not converge.
    """

    exit_code = 3

    def __init__(self, message: str, *, field: str | None = None) -> None:
        self.message = message
        self.field = field
        text = f"{field}: {message}" if field else message
        super().__init__(f"internal error: {text} (please report this)")
