"""qheat: electro-thermal quantum transport (NEGF with phonon scattering).

Load a case from a TOML file or a dict, check it, solve it, and get the
results as numpy arrays and plain Python values, or write the same result
folder as the ``qheat`` command line::

    import qheat
    case = qheat.load("cases-demo/thermionic-barrier.toml")
    result = qheat.solve(case)
    result.summary["results"]["current_a"]
    result.sites["lattice_power_w"]          # numpy array, one per cell
    result.write("runs/barrier")

Errors are subclasses of ``QheatError``: ``CaseError`` (with ``file``,
``line``, ``key``), ``InputError``, ``SolverError``, ``NotConverged``
(with the flagged ``result``) and ``OutputError``.
"""

from ._qheat import (
    Case,
    GridResult,
    CaseError,
    InputError,
    NotConverged,
    OutputError,
    QheatError,
    SolveResult,
    SolverError,
    __version__,
    load,
    screen,
    solve,
    sweep,
)

__all__ = [
    "Case",
    "GridResult",
    "CaseError",
    "InputError",
    "NotConverged",
    "OutputError",
    "QheatError",
    "SolveResult",
    "SolverError",
    "__version__",
    "load",
    "screen",
    "solve",
    "sweep",
]
