"""Typed errors raised by heat2d; only the command line turns them into messages and exit codes."""

from __future__ import annotations


class Heat2dError(Exception):
    """Base of every error heat2d raises on purpose.

    Parameters
    ----------
    reason
        What is wrong, in one line.
    file, entry, line
        Where it is wrong, when known: the model file, the model entry
        (``shape "die"``, ``boundary "rail"``, ``mesh.size``) and the 1-based line.
    """

    def __init__(
        self, reason: str, *, file: str | None = None, entry: str | None = None,
        line: int | None = None,
    ) -> None:
        self.reason = reason
        self.file = file
        self.entry = entry
        self.line = line
        super().__init__(self.message())

    def message(self) -> str:
        """The one-line message: ``FILE: ENTRY: reason (line N)``."""
        parts = [p for p in (self.file, self.entry) if p]
        text = ": ".join([*parts, self.reason])
        if self.line is not None:
            text += f" (line {self.line})"
        return text

    def located(self, *, file: str | None = None, entry: str | None = None,
                line: int | None = None) -> Heat2dError:
        """Fill in the location fields that are still unknown and return self."""
        self.file = self.file or file
        self.entry = self.entry or entry
        self.line = self.line if self.line is not None else line
        self.args = (self.message(),)
        return self


class ModelError(Heat2dError):
    """The model text is wrong: syntax, unknown key, wrong type, bad value or reference."""


class GeometryError(ModelError):
    """The shapes or selectors of a valid model do not make a body that can be meshed."""


class NoHeatPathError(ModelError):
    """A connected body has no fixed-temperature or convection boundary: no steady state exists."""


class MeshError(Heat2dError):
    """The mesher failed on a geometry that passed the checks."""


class SolveError(Heat2dError):
    """The linear solve failed or did not reach its tolerance."""


class ThermalRunawayError(SolveError):
    """No steady state exists: a conductor's I²R loss, rising with its resistivity, grows
    faster than its heat can leave. ``onset_a`` is the current (A) where it sets in,
    ``conductor`` the conductor's name."""

    def __init__(self, reason: str, *, onset_a: float, conductor: str, **where) -> None:
        self.onset_a = onset_a
        self.conductor = conductor
        super().__init__(reason, **where)
