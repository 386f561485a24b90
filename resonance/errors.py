"""Exception types for ``resonance``.

One base class for everything the package raises on purpose.  A limit that is
exceeded is a *result* (a negative margin), never an exception; exceptions are
for bad input and impossible models only.  The CLI maps :class:`InputError`
to exit status 2.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["ResonanceError", "InputError", "InputProblem", "ModelError"]


class ResonanceError(Exception):
    """Base class of every exception raised on purpose by ``resonance``."""


@dataclass(frozen=True)
class InputProblem:
    """One problem found in one input file.

    Parameters
    ----------
    file : str
        Path of the file as the user gave it [unitless].
    field : str
        Dotted field path, e.g. ``transformer[0].z_pct`` ("" for the whole file).
    problem : str
        Plain-language description of what is wrong and, where possible, a hint.
    """

    file: str
    field: str
    problem: str

    def __str__(self) -> str:
        where = f"{self.file}: {self.field}" if self.field else self.file
        return f"{where}: {self.problem}"


class InputError(ResonanceError):
    """Bad input: one or more problems, each naming the file, the field and the problem.

    Parameters
    ----------
    problems : list of InputProblem or InputProblem
        Everything found wrong; all are reported at once.
    """

    def __init__(self, problems: "list[InputProblem] | InputProblem"):
        if isinstance(problems, InputProblem):
            problems = [problems]
        self.problems: list[InputProblem] = list(problems)
        super().__init__("\n".join(str(p) for p in self.problems))

    @classmethod
    def single(cls, file: str, field: str, problem: str) -> "InputError":
        """Build an error holding one problem."""
        return cls([InputProblem(str(file), field, problem)])


class ModelError(ResonanceError):
    """A network model that cannot be solved (e.g. a singular admittance matrix)."""
