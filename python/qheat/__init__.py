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
    qheat.coefficients(case).coefficients["seebeck_v_per_k"]
    curve = qheat.generator(case, 330.0, 300.0, points=21)
    curve.table["power_w"]                    # numpy array, one per voltage

Errors are subclasses of ``QheatError``: ``CaseError`` (with ``file``,
``line``, ``key``), ``InputError``, ``SolverError``, ``NotConverged``
(with the flagged ``result``) and ``OutputError``.
"""

from ._qheat import (
    Case,
    CoefficientsResult,
    CurveResult,
    GridResult,
    CaseError,
    InputError,
    NotConverged,
    OutputError,
    QheatError,
    SolveResult,
    SolverError,
    __version__,
    coefficients,
    cooler,
    generator,
    load,
    screen,
    solve,
    sweep,
)

__all__ = [
    "Case",
    "CoefficientsResult",
    "CurveResult",
    "GridResult",
    "CaseError",
    "InputError",
    "NotConverged",
    "OutputError",
    "QheatError",
    "SolveResult",
    "SolverError",
    "__version__",
    "coefficients",
    "cooler",
    "generator",
    "load",
    "screen",
    "solve",
    "sweep",
]
