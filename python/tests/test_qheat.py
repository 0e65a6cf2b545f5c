"""The Python module against the command line: the same numbers and the
same result folders on demo cases, errors with file/line/key, interrupts
that leave nothing behind, and a dict-built case equal to the TOML one.

The command-line binary is taken from QHEAT_BIN, else target/release/qheat
of the repository; the tests fail (they do not skip) when it is missing.
"""

import csv
import os
import pathlib
import signal
import subprocess
import threading
import tomllib

import numpy as np
import pytest

import qheat

REPO = pathlib.Path(__file__).resolve().parents[2]
DEMO = REPO / "cases-demo"

# A small barrier with one phonon mode: a Born loop of several iterations.
PHONON_CASE = """name = "py-phonon"
[device]
kind = "chain"
spacing_nm = 0.5
length_nm = 10.0
effective_mass = 0.1
[[device.region]]
from_nm = 4.0
to_nm = 6.0
offset_ev = 0.08
[leads.left]
fermi_level_ev = 0.05
temperature_k = 300.0
[leads.right]
fermi_level_ev = 0.05
temperature_k = 300.0
[bias]
voltage_v = 0.02
[[phonon]]
energy_ev = 0.03
coupling_ev2 = 2e-3
[grid]
step_ev = 0.005
"""


def binary():
    path = pathlib.Path(os.environ.get("QHEAT_BIN", REPO / "target/release/qheat"))
    assert path.is_file(), f"the qheat binary is needed at {path} (cargo build --release)"
    return path


def cli(*args):
    out = subprocess.run([str(binary()), *map(str, args), "--quiet"], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    return out


def read_csv(path):
    """Columns of a result CSV as float arrays (flags as 1/0)."""
    with open(path, newline="") as f:
        rows = list(csv.reader(f))
    conv = {"true": 1.0, "false": 0.0}
    cols = list(zip(*rows[1:])) if len(rows) > 1 else [()] * len(rows[0])
    return {
        name: np.array([conv[v] if v in conv else float(v) for v in col])
        for name, col in zip(rows[0], cols)
    }


def same_table(from_cli, from_py, what):
    assert list(from_cli) == list(from_py), f"{what}: columns"
    for name, values in from_cli.items():
        # Bitwise: the CSV holds the shortest text that reads back exactly.
        np.testing.assert_array_equal(values, from_py[name], err_msg=f"{what}: {name}")


@pytest.fixture
def phonon_case(tmp_path):
    path = tmp_path / "phonon.toml"
    path.write_text(PHONON_CASE)
    return path


@pytest.mark.parametrize(
    "case_path",
    [DEMO / "thermionic-barrier.toml", DEMO / "resonant-filter.toml", "phonon"],
)
def test_solve_matches_the_cli(case_path, phonon_case, tmp_path):
    if case_path == "phonon":
        case_path = phonon_case
    # Both use one thread per core (the thread count is in summary.json).
    cli("solve", case_path, "-o", tmp_path / "cli")
    case = qheat.load(str(case_path))
    result = qheat.solve(case)
    assert result.converged
    for name in ["sites", "spectrum", "convergence"]:
        same_table(read_csv(tmp_path / "cli" / f"{name}.csv"), getattr(result, name), name)
    npz = np.load(tmp_path / "cli" / "bond_current.npz")
    bond = result.bond_current
    for key in ["map", "bond_x_nm", "energy_ev"]:
        np.testing.assert_array_equal(npz[key], bond[key], err_msg=key)
    # The folder written from Python holds the CLI's files byte for byte.
    written = result.write(tmp_path / "py")
    cli_files = sorted(p.name for p in (tmp_path / "cli").iterdir())
    assert cli_files == sorted(p.name for p in (tmp_path / "py").iterdir())
    for name in cli_files:
        assert (tmp_path / "cli" / name).read_bytes() == (tmp_path / "py" / name).read_bytes(), name
    assert result.summary["results"] == written["results"]


def test_check_gives_the_cli_json(phonon_case):
    out = cli("check", phonon_case, "--json")
    import json

    from_cli = json.loads(out.stdout)
    from_py = qheat.load(phonon_case).check()
    from_cli.pop("time_estimate_s")
    from_py.pop("time_estimate_s")
    assert from_cli == from_py


def test_dict_case_equals_toml_case(phonon_case):
    from_file = qheat.load(phonon_case)
    with open(phonon_case, "rb") as f:
        from_dict = qheat.load(tomllib.load(f))
    assert from_dict == from_file
    assert from_dict.file == "<dict>"
    a, b = qheat.solve(from_file), qheat.solve(from_dict)
    same_table(a.sites, b.sites, "sites")
    same_table(a.spectrum, b.spectrum, "spectrum")
    changed = tomllib.loads(PHONON_CASE)
    changed["bias"]["voltage_v"] = 0.03
    assert qheat.load(changed) != from_file


def test_case_errors_carry_file_line_and_key(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text(PHONON_CASE.replace("temperature_k = 300.0\n[leads.right]", "temperatur_k = 300.0\n[leads.right]"))
    with pytest.raises(qheat.CaseError) as e:
        qheat.load(bad)
    err = e.value
    assert err.file == str(bad)
    line = next(i for i, l in enumerate(bad.read_text().splitlines(), 1) if l.startswith("temperatur_k"))
    assert err.line == line
    assert err.key == "leads.left.temperatur_k"
    assert err.suggestion == "leads.left.temperature_k"
    assert isinstance(err, qheat.QheatError)
    # The same message the command line prints.
    out = subprocess.run([str(binary()), "check", str(bad)], capture_output=True, text=True)
    assert out.returncode == 1 and err.message in out.stderr


def test_dict_errors_name_the_key():
    case = tomllib.loads(PHONON_CASE)
    case["grid"]["step_ev"] = -1.0
    with pytest.raises(qheat.CaseError) as e:
        qheat.load(case)
    assert e.value.key == "grid.step_ev" and e.value.file == "<dict>"
    case["grid"]["step_ev"] = object()
    with pytest.raises(qheat.InputError, match="grid.step_ev"):
        qheat.load(case)


def test_unconverged_solve_raises_with_the_flagged_result(phonon_case, tmp_path):
    case = tomllib.loads(PHONON_CASE)
    case["solver"] = {"max_iterations": 2}
    with pytest.raises(qheat.NotConverged) as e:
        qheat.solve(qheat.load(case))
    result = e.value.result
    assert not result.converged
    assert result.summary["converged"] is False
    assert len(result.convergence["residual"]) == 2
    assert "did not converge in 2 iterations" in e.value.message
    written = result.write(tmp_path / "flagged")
    assert written["trustworthy"] is False


def test_progress_callback_sees_each_iteration(phonon_case):
    seen = []
    result = qheat.solve(qheat.load(phonon_case), progress=seen.append)
    born = [r for r in seen if r["event"] == "born iteration"]
    assert [r["iteration"] for r in born] == list(range(1, len(result.convergence["residual"]) + 1))
    np.testing.assert_array_equal([r["residual"] for r in born], result.convergence["residual"])


def test_interrupt_from_the_callback_stops_the_solve(phonon_case, tmp_path):
    calls = []

    def stop(record):
        calls.append(record["iteration"])
        if len(calls) == 2:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        qheat.solve(qheat.load(phonon_case), progress=stop)
    assert calls == [1, 2], "no callback after the interrupt"
    assert list(tmp_path.iterdir()) == [phonon_case]


def test_ctrl_c_stops_the_solve(phonon_case):
    # A real SIGINT from another thread, sent at the first Born iteration:
    # Python's handler runs at the next check (in the callback or the
    # observer between iterations) and the solve stops with
    # KeyboardInterrupt long before it would converge.
    full = len(qheat.solve(qheat.load(phonon_case)).convergence["residual"])
    assert full > 3
    seen = []

    def first(record):
        seen.append(record["iteration"])
        if len(seen) == 1:
            t = threading.Thread(target=os.kill, args=(os.getpid(), signal.SIGINT))
            t.start()
            t.join()

    with pytest.raises(KeyboardInterrupt):
        qheat.solve(qheat.load(phonon_case), progress=first)
    assert len(seen) <= 2 < full


def same_summary(cli_dir, py_dir, from_py):
    """summary.json of two grid folders agree but for where the point store
    is (inside each folder); the result's summary is the file's."""
    import json

    a, b = (json.loads((d / "summary.json").read_text()) for d in (cli_dir, py_dir))
    assert b == from_py
    assert a.pop("point_store").startswith(str(cli_dir))
    assert b.pop("point_store").startswith(str(py_dir))
    assert a == b


def test_screen_and_sweep_match_the_cli(phonon_case, tmp_path):
    height = "device.region.0.offset_ev=0.06:0.1:2"
    fermi = "leads.left.fermi_level_ev+leads.right.fermi_level_ev=0.03:0.05:2"
    cli("screen", phonon_case, "--vary", height, "--vary", fermi, "--rank", "zt", "-o", tmp_path / "cli-screen")
    case = qheat.load(str(phonon_case))
    events = []
    grid = qheat.screen(case, [height, fermi], tmp_path / "py-screen", rank="zt", progress=events.append)
    assert sorted(e["index"] for e in events) == [0, 1, 2, 3]
    for name in ["screen.csv", "ranking.csv"]:
        assert (tmp_path / "cli-screen" / name).read_bytes() == (tmp_path / "py-screen" / name).read_bytes(), name
    same_summary(tmp_path / "cli-screen", tmp_path / "py-screen", grid.summary)
    same_table(read_csv(tmp_path / "cli-screen" / "screen.csv"), grid.table, "screen.csv")
    ranked = read_csv(tmp_path / "cli-screen" / "ranking.csv")
    assert list(grid.ranking) == [int(i) for i in ranked["point"]]
    cli("sweep", phonon_case, "--vary", "bias.voltage_v=0.01:0.03:3", "-o", tmp_path / "cli-sweep")
    swept = qheat.sweep(case, ["bias.voltage_v=0.01:0.03:3"], tmp_path / "py-sweep")
    assert swept.converged and swept.ranking == []
    assert (tmp_path / "cli-sweep" / "sweep.csv").read_bytes() == (tmp_path / "py-sweep" / "sweep.csv").read_bytes()
    same_summary(tmp_path / "cli-sweep", tmp_path / "py-sweep", swept.summary)
    with pytest.raises(qheat.InputError, match="bias.voltag"):
        qheat.sweep(case, ["bias.voltag=0:1:2"], tmp_path / "bad")


def same_folders(cli_dir, py_dir):
    """The two folders hold the same files with the same bytes."""
    names = sorted(p.name for p in cli_dir.iterdir())
    assert names == sorted(p.name for p in py_dir.iterdir())
    for name in names:
        assert (cli_dir / name).read_bytes() == (py_dir / name).read_bytes(), name


def test_coefficients_match_the_cli(phonon_case, tmp_path):
    import json

    # With a phonon mode: four finite-difference runs, each a Born loop.
    cli("coefficients", phonon_case, "-o", tmp_path / "cli")
    seen = []
    result = qheat.coefficients(qheat.load(str(phonon_case)), progress=seen.append)
    assert seen and {r["event"] for r in seen} == {"born iteration"}
    written = result.write(tmp_path / "py")
    same_folders(tmp_path / "cli", tmp_path / "py")
    from_file = json.loads((tmp_path / "cli" / "summary.json").read_text())
    assert result.summary == from_file == written
    assert result.coefficients == from_file["coefficients"]
    assert result.coefficients["seebeck_v_per_k"] != 0.0


def test_generator_and_cooler_match_the_cli(tmp_path):
    import json

    path = DEMO / "thermionic-barrier.toml"
    case = qheat.load(str(path))
    cli("generator", path, "--hot", 330, "--cold", 300, "--points", 3, "-o", tmp_path / "cli-g")
    seen = []
    curve = qheat.generator(case, 330.0, 300.0, points=3, progress=seen.append)
    assert curve.kind == "generator" and curve.converged
    assert {r["event"] for r in seen} == {"curve solve"}
    assert len(seen) == curve.summary["solves"]
    curve.write(tmp_path / "py-g")
    same_folders(tmp_path / "cli-g", tmp_path / "py-g")
    same_table(read_csv(tmp_path / "cli-g" / "generator.csv"), curve.table, "generator.csv")
    assert curve.summary == json.loads((tmp_path / "cli-g" / "summary.json").read_text())
    cli("cooler", path, "--hot", 300, "--cold", 290, "--points", 3, "--cold-lead", "left", "-o", tmp_path / "cli-c")
    curve = qheat.cooler(case, hot=300.0, cold=290.0, points=3, cold_lead="left")
    assert curve.kind == "cooler" and curve.converged
    curve.write(tmp_path / "py-c")
    same_folders(tmp_path / "cli-c", tmp_path / "py-c")
    same_table(read_csv(tmp_path / "cli-c" / "cooler.csv"), curve.table, "cooler.csv")
    # Options are checked as the command line checks them, named as keywords.
    with pytest.raises(qheat.InputError, match="hot = 300, cold = 330: expected hot > cold"):
        qheat.generator(case, 300.0, 330.0)
    with pytest.raises(qheat.InputError, match="points: expected 3 to"):
        qheat.cooler(case, 300.0, 290.0, points=2)
    with pytest.raises(qheat.InputError, match="cold_lead"):
        qheat.cooler(case, 300.0, 290.0, cold_lead="middle")


def test_help_and_docstrings():
    assert "progress" in qheat.solve.__doc__ and "KeyboardInterrupt" in qheat.solve.__doc__
    assert qheat.solve.__text_signature__ == (
        "(case, /, *, warm_start=None, progress=None, ignore_memory_estimate=False)"
    )
    assert "dict" in qheat.load.__doc__
    assert "write" in qheat.SolveResult.__doc__
    for run in [qheat.coefficients, qheat.generator, qheat.cooler]:
        assert "progress" in run.__doc__ and "KeyboardInterrupt" in run.__doc__, run
    assert qheat.generator.__text_signature__ == "(case, /, hot, cold, *, points=41, progress=None)"
    assert "table" in qheat.CurveResult.__doc__ and "write" in qheat.CoefficientsResult.__doc__
    assert issubclass(qheat.NotConverged, qheat.SolverError)


def test_interrupting_a_sweep_stops_it_and_the_rerun_resumes(phonon_case, tmp_path):
    # One axis is one line of points, run in order: an interrupt raised by
    # the callback at the first finished point stops the sweep before the
    # second, and the points finished stay in the folder's store.
    case = qheat.load(str(phonon_case))
    vary = ["bias.voltage_v=0.01:0.04:4"]
    seen = []

    def stop(record):
        seen.append(record["index"])
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        qheat.sweep(case, vary, tmp_path / "grid", progress=stop)
    assert seen == [0]
    assert not (tmp_path / "grid" / "sweep.csv").exists(), "no result written"
    events = []
    grid = qheat.sweep(case, vary, tmp_path / "grid", progress=events.append)
    assert [(e["index"], e["computed"]) for e in events] == [(0, False), (1, True), (2, True), (3, True)]
    assert grid.summary["from_earlier_runs"] == 1 and grid.summary["computed_this_run"] == 3
    cli("sweep", phonon_case, "--vary", vary[0], "-o", tmp_path / "cli")
    assert (tmp_path / "cli" / "sweep.csv").read_bytes() == (tmp_path / "grid" / "sweep.csv").read_bytes()


def test_interrupts_stop_coefficients_and_curves(phonon_case):
    seen = []

    def stop(record):
        seen.append(record["event"])
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        qheat.coefficients(qheat.load(str(phonon_case)), progress=stop)
    assert seen == ["born iteration"]
    case = qheat.load(str(DEMO / "thermionic-barrier.toml"))
    for run in [qheat.generator, qheat.cooler]:
        seen.clear()
        with pytest.raises(KeyboardInterrupt):
            run(case, 330.0, 300.0, points=9, progress=stop)
        assert seen == ["curve solve"], run


def test_solve_refuses_a_case_beyond_the_memory_as_the_cli_does(phonon_case, tmp_path, monkeypatch):
    # The same budget override the command-line test uses: 1000 bytes is
    # below any case's estimate.
    monkeypatch.setenv("QHEAT_MEMORY_LIMIT_BYTES", "1000")
    out = subprocess.run(
        [str(binary()), "solve", str(phonon_case), "-o", str(tmp_path / "cli")],
        capture_output=True,
        text=True,
    )
    assert out.returncode == 1 and not (tmp_path / "cli").exists()
    case = qheat.load(str(phonon_case))
    with pytest.raises(qheat.InputError) as e:
        qheat.solve(case, progress=lambda r: pytest.fail("nothing may run"))
    message = e.value.message
    assert "needs about" in message
    # The CLI's message, with the option that runs anyway named as Python names it.
    assert "ignore_memory_estimate=True" in message
    cli_message = out.stderr.split("error: ", 1)[1]
    assert cli_message == message.replace("ignore_memory_estimate=True", "--ignore-memory-estimate") + "\n"
    # Told to, it runs.
    assert qheat.solve(case, ignore_memory_estimate=True).converged
    # Grids and curves check the estimate too, as the command line does.
    with pytest.raises(qheat.InputError, match="energy-resolved arrays"):
        qheat.sweep(case, ["bias.voltage_v=0.01:0.02:2"], tmp_path / "grid")
    with pytest.raises(qheat.InputError, match="energy-resolved arrays"):
        qheat.coefficients(case)
