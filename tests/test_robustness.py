"""Robustness: interrupted and concurrent runs, solver failures, fuzzed sites and files."""

from __future__ import annotations

import hashlib
import json
import shutil
import os
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from cogendispatch import plan as plan_mod
from cogendispatch.cli import main
from cogendispatch.errors import SolveError
from cogendispatch.results import plan_results
from cogendispatch.site import build_site_model
from cogendispatch.solve import SolveOptions, solve
from test_crosschecks import small_sites
from test_plan_small import TINY_TOML

ROOT = Path(__file__).resolve().parents[1]
SERIES = ("time,demand:HP [t/h],demand:LP [t/h],load [MW],price:import [per MWh]\n"
          + "".join(f"2027-03-01T{h:02d}:00,0,{20 + h},5,{50 + 5 * h}\n" for h in range(12)))


@pytest.fixture
def ctrl_c_default():  # noqa: ANN201
    """Ctrl-C as in a terminal for the test: a suite started as a background job of a
    shell script inherits it ignored, which the plan rightly leaves alone."""
    before = signal.signal(signal.SIGINT, signal.default_int_handler)
    yield
    signal.signal(signal.SIGINT, before)


def _default_sigint_in_child() -> None:
    signal.signal(signal.SIGINT, signal.SIG_DFL)  # Python then installs its own handler


def _files(tmp_path: Path) -> tuple[Path, Path]:
    (tmp_path / "site.toml").write_text(TINY_TOML)
    (tmp_path / "s.csv").write_text(SERIES)
    return tmp_path / "site.toml", tmp_path / "s.csv"


def _digest(d: Path) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(d.iterdir())}


def test_interrupted_write_leaves_the_previous_results(tmp_path, monkeypatch) -> None:  # noqa: ANN001
    site, ser = _files(tmp_path)
    out = tmp_path / "out"
    assert main(["plan", str(site), "--series", str(ser), "--out", str(out), "--quiet"]) == 0
    before = _digest(out)
    real = plan_mod.write_plan_files

    def half_then_ctrl_c(run, d):  # noqa: ANN001, ANN202
        real(run, d)
        (d / "schedule.csv").write_text("half")
        raise KeyboardInterrupt

    monkeypatch.setattr(plan_mod, "write_plan_files", half_then_ctrl_c)
    assert main(["plan", str(site), "--series", str(ser), "--out", str(out), "--quiet"]) == 130
    assert _digest(out) == before
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".out.")] == []


def test_ctrl_c_during_the_solve_is_an_interruption(tmp_path, ctrl_c_default) -> None:  # noqa: ANN001
    """Ctrl-C while HiGHS runs (and calls back into Python) exits 130 with nothing written;
    it once came out as a solver error (exit 4)."""
    import threading

    out = tmp_path / "out"
    # the demo week with two threads: HiGHS's MIP (and its callbacks) run from the start
    timer = threading.Timer(3.0, lambda: os.kill(os.getpid(), signal.SIGINT))
    timer.start()
    t0 = time.perf_counter()
    try:
        code = main(["plan", str(ROOT / "plant_configs/saltmarsh_refinery.toml"), "--series",
                     str(ROOT / "plant_configs/saltmarsh_week.csv"), "--out", str(out),
                     "--threads", "2", "--time-limit", "60", "--quiet"])
    finally:
        timer.cancel()
    assert code == 130
    assert time.perf_counter() - t0 < 20  # stopped, not run to its limit
    assert not out.exists()


def test_ctrl_c_stops_an_lp_at_once(ctrl_c_default: None) -> None:
    """Ctrl-C during an LP (the demo week's relaxation, about 3 s) stops it within a
    fraction of a second; it used to run to its end first (2.4 to 4.8 s after the signal).
    The next run in the same process is not stopped by it."""
    import threading

    from cogendispatch.plant.load import load_site
    from cogendispatch.plant.series import load_series
    from cogendispatch.solve import LoadedModel

    cfg = load_site(ROOT / "plant_configs/saltmarsh_refinery.toml")
    lm = LoadedModel(build_site_model(cfg, load_series(ROOT / "plant_configs/saltmarsh_week.csv", cfg)))
    lm._set_integrality(False)
    sent: list[float] = []
    timer = threading.Timer(0.5, lambda: (sent.append(time.perf_counter()), os.kill(os.getpid(), signal.SIGINT)))
    timer.start()
    try:
        with pytest.raises(KeyboardInterrupt):
            lm._run(60.0)
    finally:
        timer.cancel()
    assert sent and time.perf_counter() - sent[0] < 1.0
    lm._run(60.0)
    assert lm.h.getModelStatus().name == "kOptimal"


def test_ctrl_c_ignored_stays_ignored_during_a_run(ctrl_c_default: None) -> None:
    """A process started with Ctrl-C ignored (a background job of a shell script) keeps
    ignoring it while HiGHS runs; the default handler is put back after each run."""
    from cogendispatch.solve import _ctrl_c_as_flag

    before = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        with _ctrl_c_as_flag() as flag:
            assert signal.getsignal(signal.SIGINT) is signal.SIG_IGN
            os.kill(os.getpid(), signal.SIGINT)
            time.sleep(0.05)
        assert not flag.is_set()
    finally:
        signal.signal(signal.SIGINT, before)
    with _ctrl_c_as_flag():
        assert signal.getsignal(signal.SIGINT) is not signal.default_int_handler
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler


def test_killed_runs_never_leave_a_partial_output(tmp_path) -> None:  # noqa: ANN001
    site, ser = _files(tmp_path)
    out = tmp_path / "out"
    assert main(["plan", str(site), "--series", str(ser), "--out", str(out), "--quiet"]) == 0
    names = set(_digest(out))
    env = dict(os.environ, PYTHONPATH=str(ROOT / "model") + os.pathsep + os.environ.get("PYTHONPATH", ""))
    # killed while solving (0.3 s in), and twice while the new results are being written:
    # the kill waits until the temporary folder beside ``out`` exists, then lands a moment
    # (0 or 0.2 s) into the write, so each case is hit whatever the machine's speed
    for early, into_write in ((True, 0.0), (False, 0.0), (False, 0.2)):
        p = subprocess.Popen([sys.executable, "-m", "cogendispatch.cli", "plan", str(site), "--series", str(ser),
                              "--out", str(out), "--quiet"], env=env, stdout=subprocess.DEVNULL,
                             stderr=subprocess.DEVNULL)
        if early:
            time.sleep(0.3)
        else:
            deadline = time.monotonic() + 120
            while not list(tmp_path.glob(".out.new-*")) and p.poll() is None and time.monotonic() < deadline:
                time.sleep(0.002)
            assert list(tmp_path.glob(".out.new-*")), "the run ended before its write could be interrupted"
            time.sleep(into_write)
        p.send_signal(signal.SIGKILL)
        p.wait()
        # whatever the moment of the kill, the folder holds one complete set of results
        assert set(_digest(out)) == names
        assert (out / "summary.json").read_text().strip().endswith("}")
        for left in tmp_path.glob(".out.new-*"):  # what a killed run leaves behind, cleared for the next
            shutil.rmtree(left)


def test_output_folder_gets_the_usual_mode(tmp_path) -> None:  # noqa: ANN001
    # the temporary folder is private while it is written; the results are for the team
    from cogendispatch.outputs import atomic_dir

    old = os.umask(0o022)
    try:
        out = atomic_dir(tmp_path / "shared", lambda d: (d / "summary.json").write_text("{}"))
    finally:
        os.umask(old)
    assert out.stat().st_mode & 0o777 == 0o755


def test_json_outputs_are_strict(tmp_path) -> None:  # noqa: ANN001
    # JSON (RFC 8259) has no NaN or Infinity; a price that flips nothing is null
    import json

    from cogendispatch.outputs import write_json

    write_json({"flip": float("nan"), "gap": np.float64("inf"), "rows": [np.float64(1.5), None], "n": np.int64(3)},
               tmp_path / "a.json")
    text = (tmp_path / "a.json").read_text()

    def refuse(name: str) -> None:
        raise ValueError(name)

    assert json.loads(text, parse_constant=refuse) == {"flip": None, "gap": None, "rows": [1.5, None], "n": 3}


def test_two_runs_at_once_do_not_interfere(tmp_path) -> None:  # noqa: ANN001
    site, ser = _files(tmp_path)
    env = dict(os.environ, PYTHONPATH=str(ROOT / "model") + os.pathsep + os.environ.get("PYTHONPATH", ""))
    procs = [subprocess.Popen([sys.executable, "-m", "cogendispatch.cli", "plan", str(site), "--series", str(ser),
                               "--out", str(tmp_path / f"out{k}"), "--quiet"], env=env,
                              stdout=subprocess.DEVNULL, stderr=subprocess.PIPE) for k in (1, 2)]
    for p in procs:
        assert p.wait(timeout=120) == 0, p.stderr.read()
    a, b = (tmp_path / "out1" / "schedule.csv").read_text(), (tmp_path / "out2" / "schedule.csv").read_text()
    assert a == b


def test_no_schedule_at_all_is_a_clear_error(tmp_path, monkeypatch, capsys) -> None:  # noqa: ANN001
    from cogendispatch import solve as solve_mod

    site, ser = _files(tmp_path)

    def nothing(self, options, progress=None):  # noqa: ANN001, ANN202
        return solve_mod.SolveReport(status="infeasible", objective=float("nan"), bound=float("nan"), gap=float("inf"))

    monkeypatch.setattr(solve_mod.LoadedModel, "solve_mip", nothing)
    rc = main(["plan", str(site), "--series", str(ser), "--out", str(tmp_path / "out"), "--quiet"])
    err = capsys.readouterr().err
    assert rc == 4 and "without any schedule" in err and "Traceback" not in err
    assert "contradictory" in err  # a status other than the time limit
    assert not (tmp_path / "out").exists()
    with pytest.raises(SolveError):
        solve(build_site_model(*_tiny_model_inputs(tmp_path)), SolveOptions())


@pytest.mark.parametrize("error", ["NoBaselineError", "SolveError"])
def test_a_baseline_without_solution_leaves_the_plan_whole(error, tmp_path, monkeypatch, capsys) -> None:  # noqa: ANN001
    """The practice rules can break a site's own limits, or HiGHS fail on them; the plan is
    then written without its comparison, and says why."""
    import json

    from cogendispatch import baseline

    site, ser = _files(tmp_path)
    kind = {"NoBaselineError": baseline.NoBaselineError, "SolveError": SolveError}[error]

    def broken(*args, **kwargs):  # noqa: ANN002, ANN003, ANN202
        raise kind("the practice-rule schedule has no solution")

    monkeypatch.setattr(plan_mod, "practice_baseline", broken)
    out = tmp_path / "out"
    assert main(["plan", str(site), "--series", str(ser), "--out", str(out)]) == 0
    captured = capsys.readouterr()
    summary = json.loads((out / "summary.json").read_text())
    assert "baseline" not in summary
    assert summary["baseline_note"] == "no practice baseline: the practice-rule schedule has no solution"
    assert "no practice baseline" in captured.out and "Traceback" not in captured.err
    assert "no practice baseline" in (out / "report.html").read_text()


def _tiny_model_inputs(tmp_path: Path):  # noqa: ANN202
    from cogendispatch.plant.load import load_site
    from cogendispatch.plant.series import load_series
    cfg = load_site(tmp_path / "site.toml")
    return cfg, load_series(tmp_path / "s.csv", cfg)


def test_time_limit_returns_the_best_schedule_with_its_gap() -> None:
    from cogendispatch.plant.load import load_site
    from cogendispatch.plant.series import load_series
    cfg = load_site(ROOT / "plant_configs" / "saltmarsh_refinery.toml")
    ser = load_series(ROOT / "plant_configs" / "saltmarsh_week.csv", cfg).window(0, 72)
    rep = solve(build_site_model(cfg, ser), SolveOptions(gap=1e-9, time_limit=8))
    assert rep.status == "time limit" and rep.has_solution and rep.gap > 0


# ------------------------------------------------------------------ fuzzing

@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(small_sites(), st.floats(0.5, 4.0))
def test_random_valid_sites_solve_or_are_diagnosed(case, scale: float) -> None:  # noqa: ANN001
    cfg, ser = case
    ser = ser.window(0, ser.hours)
    demand = ser.demand * scale  # up to four times: some weeks are impossible
    ser = type(ser)(**{**ser.__dict__, "demand": demand})
    sm = build_site_model(cfg, ser)
    rep = solve(sm, SolveOptions(gap=1e-6, time_limit=20))
    res = plan_results(sm)
    sums = res.balances.groupby(["time", "header"]).flow_t_h.sum()
    assert np.abs(sums.to_numpy()).max() < 1e-6  # closed, slacks included
    short = res.balances[res.balances.term.str.startswith("shortfall")].flow_t_h.abs().max()
    assert (short > 1e-5) == any("header short" in d for d in res.diagnosis)
    reserve_short = max(sm.model.reserve_short[t].value or 0.0 for t in sm.model.T)
    assert (reserve_short > 1e-5) == any(d.startswith("steam reserve short") for d in res.diagnosis)
    assert rep.has_solution


DEMO = (ROOT / "plant_configs" / "saltmarsh_refinery.toml").read_text()
_QTY = [m for m in re.finditer(r'^(\s*\w+ = ")([-0-9.]+) ([^"]+)"', DEMO, re.M)]
_REF = [m for m in re.finditer(r'^(\s*(?:header|inlet|to|from|heating_steam|ejector_header) = ")([^"]+)"', DEMO, re.M)]
_TABLES = [m for m in re.finditer(r"^\s*\[\[?[a-z.]+\]\]?\s*$", DEMO, re.M)]


@st.composite
def broken_site(draw):  # noqa: ANN001, ANN201
    kind = draw(st.sampled_from(["unit", "bare", "ref", "key", "toml"]))
    if kind == "unit":
        m = draw(st.sampled_from(_QTY))
        return DEMO[:m.start()] + f'{m.group(1)}{m.group(2)} zorks"' + DEMO[m.end():]
    if kind == "bare":
        m = draw(st.sampled_from(_QTY))
        return DEMO[:m.start()] + m.group(1)[:-1] + m.group(2) + DEMO[m.end():]
    if kind == "ref":
        m = draw(st.sampled_from(_REF))
        return DEMO[:m.start()] + f'{m.group(1)}NOWHERE"' + DEMO[m.end():]
    if kind == "key":
        m = draw(st.sampled_from(_TABLES))
        return DEMO[:m.end()] + "\nsurplus_knob = 3" + DEMO[m.end():]
    lines = DEMO.splitlines()
    code = [i for i, ln in enumerate(lines) if ln.strip() and not ln.lstrip().startswith("#")]
    i = draw(st.sampled_from(code))
    lines[i] = '"[= ' + lines[i]  # broken TOML syntax on a line that is not a comment
    return "\n".join(lines)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(broken_site())
def test_mutated_site_files_exit_2_with_a_message(tmp_path, capsys, text: str) -> None:  # noqa: ANN001
    p = tmp_path / "mutated.toml"
    p.write_text(text)
    rc = main(["inspect", str(p)])
    err = capsys.readouterr().err
    assert rc == 2
    assert "mutated.toml" in err and "Traceback" not in err


def _spawned(pid: int) -> int:
    """How many processes ``pid`` has started through multiprocessing's spawn (a study's
    manager and its workers), from /proc."""
    n = 0
    for p in Path("/proc").iterdir():
        try:
            if not p.name.isdigit() or f"PPid:\t{pid}\n" not in (p / "status").read_text():
                continue
            n += b"spawn_main" in (p / "cmdline").read_bytes()
        except OSError:  # gone meanwhile
            continue
    return n


@pytest.mark.skipif(not Path("/proc/self/status").is_file(), reason="reads the workers from /proc")
@pytest.mark.parametrize("after", [0.0, 8.0], ids=["workers-starting", "workers-solving"])
def test_ctrl_c_stops_a_study_without_running_its_queued_scenarios(tmp_path, ctrl_c_default, after) -> None:  # noqa: ANN001
    """Ctrl-C (SIGINT to the terminal's process group: the study and its workers) during a
    study of six scenarios on two workers exits 130 within seconds and writes nothing. The
    scenarios still queued once ran to the end first (about 30 s more here). Sent as soon
    as the workers exist, it finds them importing Pyomo and HiGHS: they stop without a
    traceback too."""
    import pandas as pd

    ser = tmp_path / "two_days.csv"
    pd.read_csv(ROOT / "plant_configs/saltmarsh_week.csv").iloc[:48].to_csv(ser, index=False)
    sc = tmp_path / "scenarios.toml"
    sc.write_text("".join(f'[[scenario]]\nname = "s{i}"\nimport = {{ multiply = {0.8 + 0.1 * i:.1f} }}\n'
                          for i in range(6)))
    out = tmp_path / "study"
    code = "import sys; from cogendispatch.cli import main; sys.exit(main(sys.argv[1:]))"
    proc = subprocess.Popen([sys.executable, "-c", code, "study", str(ROOT / "plant_configs/saltmarsh_refinery.toml"),
                             "--series", str(ser), "--scenarios", str(sc), "--out", str(out), "--window", "12",
                             "--lookahead", "2", "--time-limit", "3", "--workers", "2", "--quiet"],
                            start_new_session=True, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            preexec_fn=_default_sigint_in_child)
    try:
        deadline = time.perf_counter() + 60.0
        while _spawned(proc.pid) < 3 and time.perf_counter() < deadline:  # the manager and two workers
            time.sleep(0.05)
        time.sleep(after)
        assert proc.poll() is None
        os.killpg(proc.pid, signal.SIGINT)
        t0 = time.perf_counter()
        _, err = proc.communicate(timeout=60)
        waited = time.perf_counter() - t0
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
            proc.wait()
    assert proc.returncode == 130
    assert waited < 10.0
    assert not out.exists()
    assert b"Traceback" not in err, err.decode()[-2000:]  # workers stop quietly too


def test_a_silent_highs_step_gets_a_progress_note(tmp_path, monkeypatch) -> None:  # noqa: ANN001
    """HiGHS calls back between its steps, not within its sub-searches (up to 36 s on the
    demo week): after QUIET_NOTE s without a call back the plan says it is still at work;
    a call back resets the count."""
    from cogendispatch import solve as solve_mod
    from cogendispatch.plant.load import load_site
    from cogendispatch.plant.series import load_series

    site, ser = _files(tmp_path)
    cfg = load_site(site)
    lm = solve_mod.LoadedModel(build_site_model(cfg, load_series(ser, cfg)))
    monkeypatch.setattr(solve_mod, "QUIET_NOTE", 1.0)
    said: list[str] = []
    with lm._quiet_notes(said.append):
        time.sleep(2.6)  # a silent step
    assert len(said) in (1, 2) and said[0].startswith("still solving: no word from HiGHS for")
    said.clear()
    with lm._quiet_notes(said.append):
        for _ in range(5):  # HiGHS calling back every 0.5 s: nothing to say
            time.sleep(0.5)
            lm.last_callback = time.perf_counter()
    assert said == []
    lm._run(10.0)  # a run calls back (the MIP interrupt, simplex iterations): the clock moves
    assert time.perf_counter() - lm.last_callback < 1.0


def test_ctrl_c_while_starting_exits_quietly(tmp_path) -> None:  # noqa: ANN001
    """Ctrl-C during the command's start-up imports (about a second) exits 130 with one line
    and no traceback, as Ctrl-C later does; it once printed a traceback through scipy."""
    code = "from cogendispatch.entry import run; run()"
    proc = subprocess.Popen([sys.executable, "-c", code, "inspect", str(ROOT / "plant_configs/saltmarsh_refinery.toml")],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            preexec_fn=_default_sigint_in_child)
    time.sleep(0.15)  # inside the imports (pandas, Pyomo, HiGHS take a second or more)
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, (out, err)
    assert "Traceback" not in err and "interrupted while starting" in err


def test_a_loaded_model_is_freed_when_dropped(tmp_path) -> None:  # noqa: ANN001
    """HiGHS holds each instance's callback where the garbage collector cannot see it: a
    callback that held its model strongly kept every dropped model (and its Pyomo model)
    alive, a window or an advice hour at a time. Its spare for the helper likewise."""
    import gc
    import weakref

    from cogendispatch.plant.load import load_site
    from cogendispatch.plant.series import load_series
    from cogendispatch.solve import LoadedModel

    site, ser = _files(tmp_path)
    cfg = load_site(site)
    lm = LoadedModel(build_site_model(cfg, load_series(ser, cfg)))
    lm._run(10.0)  # callbacks have run
    spare = lm.spare()
    refs = [weakref.ref(lm), weakref.ref(spare), weakref.ref(lm.sm.model)]
    del lm, spare
    gc.collect()
    assert [r() for r in refs] == [None, None, None]


def test_files_hold_no_negative_zeros(tmp_path) -> None:  # noqa: ANN001
    """An outflow of nothing (a boiler off, a motor idle) is written 0, not -0, and the
    schedule as written (outputs.as_written, what a plan verifies) agrees with the file."""
    import pandas as pd

    from cogendispatch.outputs import as_written, write_csv

    df = pd.DataFrame({"term": ["B3 steam", "BFWP motors"], "flow_t_h": [-0.0, -1.5]})
    write_csv(df, tmp_path / "b.csv", index=False)
    assert (tmp_path / "b.csv").read_text().splitlines()[1:] == ["B3 steam,0", "BFWP motors,-1.5"]
    assert str(as_written(df).flow_t_h.iloc[0]) == "0.0"


def test_a_time_limit_without_a_schedule_asks_for_more_time(tmp_path, monkeypatch, capsys) -> None:  # noqa: ANN001
    """Every week is feasible with its slacks, so a plan that ends without a schedule at its
    time limit has run out of time, not met contradictory limits: the message says so."""
    from cogendispatch import solve as solve_mod
    from cogendispatch.cli import main
    from cogendispatch.solve import SolveReport

    def ran_out(self, options, progress=None, hint=None):  # noqa: ANN001, ANN202
        return SolveReport("time limit", float("nan"), float("-inf"), float("inf"))

    monkeypatch.setattr(solve_mod.LoadedModel, "solve_mip", ran_out)
    rc = main(["plan", str(ROOT / "plant_configs/saltmarsh_refinery.toml"), "--series",
               str(ROOT / "plant_configs/saltmarsh_week.csv"), "--out", str(tmp_path / "out"),
               "--time-limit", "5", "--quiet"])
    err = capsys.readouterr().err
    assert rc == 4 and "the 5 s time limit ran out before any schedule was found" in err
    assert "contradictory" not in err and not (tmp_path / "out").exists()


def test_a_second_ctrl_c_ends_a_run_that_does_not_call_back(tmp_path: Path) -> None:
    """HiGHS's sub-MIPs never call back, so the first Ctrl-C waits for them; a second one
    ends the process at once with exit code 130 (here: a block that never looks at the flag)."""
    code = ("import time\nfrom cogendispatch.solve import _ctrl_c_as_flag\n"
            "with _ctrl_c_as_flag():\n    print('ready', flush=True)\n    time.sleep(30)\n")
    proc = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            env={**os.environ, "PYTHONPATH": str(ROOT / "model")},
                            preexec_fn=_default_sigint_in_child)
    try:
        assert proc.stdout is not None and proc.stdout.readline().strip() == "ready"
        proc.send_signal(signal.SIGINT)
        time.sleep(0.3)
        assert proc.poll() is None  # the first only sets the flag
        t0 = time.perf_counter()
        proc.send_signal(signal.SIGINT)
        rc = proc.wait(timeout=10)
    finally:
        proc.kill()
    assert rc == 130 and time.perf_counter() - t0 < 2.0
    assert "stopped at once (second Ctrl-C); nothing written" in proc.stderr.read()


def test_a_stop_between_the_two_renames_puts_the_old_folder_back(tmp_path, monkeypatch) -> None:  # noqa: ANN001
    """The old folder is moved aside, then the new one into its place: a Ctrl-C between
    the two left no folder at all (the old one stranded under a hidden name)."""
    from cogendispatch import outputs

    out = outputs.atomic_dir(tmp_path / "p", lambda d: (d / "summary.json").write_text('{"kind": "plan", "v": 1}'))
    real = os.replace
    calls = []

    def second_fails(a, b):  # noqa: ANN001, ANN202
        calls.append((a, b))
        if len(calls) == 2:
            raise KeyboardInterrupt
        return real(a, b)

    monkeypatch.setattr(outputs.os, "replace", second_fails)
    with pytest.raises(KeyboardInterrupt):
        outputs.atomic_dir(out, lambda d: (d / "summary.json").write_text('{"kind": "plan", "v": 2}'))
    monkeypatch.setattr(outputs.os, "replace", real)
    assert '"v": 1' in (out / "summary.json").read_text()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["p"]  # nothing stranded beside it


def test_an_interrupted_report_leaves_no_temporary_file(tmp_path, monkeypatch) -> None:  # noqa: ANN001
    """A Ctrl-C while the workbook is written left '.report.html.tmp' in the plan folder,
    which then refused the next plan as a file cogendispatch did not write."""
    import cogendispatch.report as rep
    from cogendispatch.cli import main

    site, ser = _files(tmp_path)
    out = tmp_path / "plan"
    assert main(["plan", str(site), "--series", str(ser), "--out", str(out), "--quiet"]) == 0

    def stopped(d, path):  # noqa: ANN001, ANN202
        raise KeyboardInterrupt

    monkeypatch.setattr(rep, "write_plan_xlsx", stopped)
    with pytest.raises(KeyboardInterrupt):
        rep.write_reports(out)
    assert not any(p.name.endswith(".tmp") for p in out.iterdir())


@pytest.mark.skipif(not hasattr(signal, "pthread_sigmask") or not Path("/proc/self/status").is_file(),
                    reason="signal masks read from /proc")
def test_study_processes_hold_ctrl_c_until_their_scenario_and_after_it(monkeypatch) -> None:  # noqa: ANN001
    """A study's manager and workers start with Ctrl-C held (it would end them with a
    traceback from inside multiprocessing while they import); a worker takes it while its
    scenario runs and holds it again after, while it waits for the next one."""
    import multiprocessing as mp

    from cogendispatch import studies

    def sigblk(pid: int) -> int:
        line = next(x for x in Path(f"/proc/{pid}/status").read_text().splitlines() if x.startswith("SigBlk:"))
        return int(line.split()[1], 16)

    with studies._ctrl_c_blocked():
        manager = mp.get_context("spawn").Manager()
    try:
        assert sigblk(manager._process.pid) & (1 << (signal.SIGINT - 1))
    finally:
        manager.shutdown()
    assert signal.SIGINT not in signal.pthread_sigmask(signal.SIG_BLOCK, [])  # the mask as it was
    # a worker's job: Ctrl-C taken inside, held again after
    seen = []
    monkeypatch.setattr(studies, "rolling_horizon",
                        lambda *a, **k: seen.append(signal.SIGINT in signal.pthread_sigmask(signal.SIG_BLOCK, [])))
    try:
        studies._scenario_job((None, type("P", (), {"name": "x"})(), None, 24, 0, None, None, studies._NEVER))
        assert seen == [False] and signal.SIGINT in signal.pthread_sigmask(signal.SIG_BLOCK, [])
    finally:
        signal.pthread_sigmask(signal.SIG_UNBLOCK, {signal.SIGINT})


@pytest.mark.parametrize("threads", [1, 2])
def test_a_limit_shorter_than_the_lp_still_gives_a_schedule(threads: int) -> None:
    """Half a second is less than the demo week's LP relaxation takes (3 to 10 s): the
    start's LP runs on to its end (at least START_LP_MIN), so the plan has a schedule and
    no exit 4; on a busy machine a 10 s plan used to end with none."""
    from cogendispatch.plant.load import load_site
    from cogendispatch.plant.series import load_series
    from cogendispatch.site import build_site_model
    from cogendispatch.solve import SolveOptions, solve

    cfg = load_site(ROOT / "plant_configs/saltmarsh_refinery.toml")
    sm = build_site_model(cfg, load_series(ROOT / "plant_configs/saltmarsh_week.csv", cfg))
    rep = solve(sm, SolveOptions(time_limit=0.5, threads=threads, settle=False))
    assert rep.has_solution and rep.objective < 2.5e6  # a schedule without shortfall penalties


def test_summary_says_the_reserve_was_off_with_no_reserve(tmp_path) -> None:  # noqa: ANN001
    """--no-reserve overrides the site file: summary.json says what the run kept, not what
    the site file asks (it once read "enabled": true for a run without the reserve)."""
    site, ser = _files(tmp_path)
    site.write_text(site.read_text().replace("[reserve]\nenabled = false", "[reserve]\nenabled = true"))
    for flag, kept, by in (([], True, "site file"), (["--no-reserve"], False, "command line")):
        out = tmp_path / f"o{len(flag)}"
        # the tiny site cannot hold a reserve (exit 3 with it); the summary is written alike
        assert main(["plan", str(site), "--series", str(ser), "--out", str(out), "--quiet", *flag]) == (0 if flag else 3)
        res = json.loads((out / "summary.json").read_text())["reserve"]
        assert res["enabled"] is kept and res["set_by"] == by


def test_a_gap_on_penalties_is_also_given_against_the_money() -> None:
    """58.9 M of objective of which 58.65 M penalties and a 0.1 % gap leave 58.8 k to the
    bound: 21.7 % of the 270 k of money (the figures of a mill whose reserve cannot be
    held). Without penalties, or proven to 0, nothing is added."""
    from cogendispatch.cli import penalty_gap_line

    s = {"objective": 58_923_703.0, "bound": 58_864_912.0, "gap": 0.000998, "cost": {"penalty": 58_653_074.0}}
    line = penalty_gap_line(s, "USD")
    assert "against the money alone, 270,629 USD, the bound leaves up to 58,791 USD (21.7 %)" in line
    assert penalty_gap_line({**s, "cost": {"penalty": 0.0}}, "USD") is None
    assert penalty_gap_line({**s, "gap": 0.0}, "USD") is None
