"""Type hints of the native part of qheat (see the package docstring)."""

import os
from typing import Any, Callable, Literal, Mapping, Optional, Union

import numpy as np
import numpy.typing as npt

__version__: str

Array = npt.NDArray[np.float64]
Progress = Callable[[dict[str, Any]], object]

class QheatError(Exception):
    """Base class of every error qheat raises."""

    message: str

class CaseError(QheatError):
    """The case is wrong: where (file, line, column) and which key."""

    file: str
    line: Optional[int]
    column: Optional[int]
    key: Optional[str]
    suggestion: Optional[str]
    kind: str

class InputError(QheatError):
    """Other input that cannot be used (options, folders, grids)."""

class SolverError(QheatError):
    """A numerical fault left no trustworthy result; `summary` (when set) is
    the failed-solve summary the command line writes."""

    summary: dict[str, Any]

class NotConverged(SolverError):
    """A loop stopped before converging; `result` is the flagged result."""

    result: Union["SolveResult", "GridResult", "CurveResult"]

class OutputError(QheatError):
    """A result folder could not be written or read."""

class Case:
    """A case, read and resolved."""

    @property
    def name(self) -> str: ...
    @property
    def file(self) -> str: ...
    @property
    def warnings(self) -> list[str]: ...
    def check(self) -> dict[str, Any]: ...
    def to_toml(self) -> str: ...
    def __eq__(self, other: object) -> bool: ...

class SolveResult:
    """The results of one operating point."""

    @property
    def summary(self) -> dict[str, Any]: ...
    @property
    def converged(self) -> bool: ...
    @property
    def sites(self) -> dict[str, Array]: ...
    @property
    def spectrum(self) -> dict[str, Array]: ...
    @property
    def convergence(self) -> dict[str, Array]: ...
    @property
    def bond_current(self) -> dict[str, Array]: ...
    def write(
        self,
        folder: Union[str, os.PathLike[str]],
        *,
        overwrite: bool = False,
        full_arrays: bool = False,
        result_budget_mb: float = 50.0,
    ) -> dict[str, Any]: ...

def load(
    source: Union[str, os.PathLike[str], Mapping[str, Any]],
    /,
    *,
    base_dir: Optional[Union[str, os.PathLike[str]]] = None,
) -> Case: ...
def solve(
    case: Case,
    /,
    *,
    warm_start: Optional[Union[str, os.PathLike[str]]] = None,
    progress: Optional[Progress] = None,
    ignore_memory_estimate: bool = False,
) -> SolveResult: ...

class GridResult:
    """A finished sweep or screen (its folder is written)."""

    @property
    def summary(self) -> dict[str, Any]: ...
    @property
    def table(self) -> dict[str, Array]: ...
    @property
    def ranking(self) -> list[int]: ...
    @property
    def converged(self) -> bool: ...

def sweep(
    case: Case,
    vary: list[str],
    folder: Union[str, os.PathLike[str]],
    /,
    *,
    overwrite: bool = False,
    progress: Optional[Progress] = None,
) -> GridResult: ...
def screen(
    case: Case,
    vary: list[str],
    folder: Union[str, os.PathLike[str]],
    /,
    *,
    rank: str = "zt",
    hot: Optional[float] = None,
    cold: Optional[float] = None,
    points: int = 21,
    overwrite: bool = False,
    progress: Optional[Progress] = None,
) -> GridResult: ...

class CoefficientsResult:
    """Linear-response coefficients of a case (what `qheat coefficients`
    computes)."""

    @property
    def summary(self) -> dict[str, Any]: ...
    @property
    def coefficients(self) -> dict[str, Any]: ...
    def write(
        self, folder: Union[str, os.PathLike[str]], *, overwrite: bool = False
    ) -> dict[str, Any]: ...

def coefficients(
    case: Case,
    /,
    *,
    progress: Optional[Progress] = None,
) -> CoefficientsResult: ...

class CurveResult:
    """A generator or cooler curve: its table, summary and folder."""

    @property
    def kind(self) -> Literal["generator", "cooler"]: ...
    @property
    def summary(self) -> dict[str, Any]: ...
    @property
    def table(self) -> dict[str, Array]: ...
    @property
    def converged(self) -> bool: ...
    def write(
        self, folder: Union[str, os.PathLike[str]], *, overwrite: bool = False
    ) -> dict[str, Any]: ...

def generator(
    case: Case,
    /,
    hot: float,
    cold: float,
    *,
    points: int = 41,
    progress: Optional[Progress] = None,
) -> CurveResult: ...
def cooler(
    case: Case,
    /,
    hot: float,
    cold: float,
    *,
    points: int = 41,
    cold_lead: Literal["left", "right"] = "right",
    progress: Optional[Progress] = None,
) -> CurveResult: ...
