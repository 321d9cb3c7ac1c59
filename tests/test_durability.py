"""Durability of outputs: atomic files, output sets, SIGKILL at random moments, Ctrl-C.

A result file is never seen half written: writers go through
:mod:`lapsolve.atomic` (temporary file in the same folder, fsync, rename). The
files of one run appear together (a commit journal completes an interrupted set
of renames at the next write), and debris of killed writers is swept by the
next write in the folder.
"""

import json
import os
import random
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import meshio
import numpy as np
import pytest
from helpers import COAX_TOML

from lapsolve import atomic
from lapsolve.atomic import OutputSet, atomic_path, sweep, write_text
from lapsolve.cli import main
from lapsolve.errors import InputError

PNG_HEAD = b"\x89PNG\r\n\x1a\n"
PNG_TAIL = b"IEND\xaeB`\x82"  # the IEND chunk and its CRC (PNG specification, W3C 2003)
RESULTS = ("solution.vtu", "summary.json", "field.png")
CLI = [sys.executable, "-c", "import sys; from lapsolve.cli import main; sys.exit(main())"]


def dead_pid():
    """The pid of a process that has exited (and been reaped)."""
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    return proc.pid


def visible(folder):
    return sorted(p.name for p in Path(folder).iterdir() if not p.name.startswith("."))


def hidden(folder):
    return sorted(p.name for p in Path(folder).iterdir() if p.name.startswith("."))


# --------------------------------------------------------------------------- unit checks
def test_temporary_names_carry_the_pid(tmp_path):
    with OutputSet(tmp_path) as out:
        tmp = out.path("solution.vtu")
        assert re.fullmatch(rf"\.solution\.vtu\.{os.getpid()}\.[a-z0-9_]+\.part\.vtu",
                            tmp.name)
        tmp.write_text("x")
        out.commit()
    with atomic_path(tmp_path / "a.json") as tmp:
        assert tmp.name.startswith(f".a.json.{os.getpid()}.") and tmp.name.endswith(".part.json")
        tmp.write_text("{}")
    assert visible(tmp_path) == ["a.json", "solution.vtu"] and hidden(tmp_path) == []


def test_sweep_removes_debris_of_dead_writers_only(tmp_path):
    gone, alive = dead_pid(), os.getpid()
    debris = [f".solution.vtu.{gone}.abc123.part.vtu", f".summary.json.{gone}.x_9.part.json",
              f".lapsolve-commit.json.{gone}.q1.part.json"]
    keep = [f".field.png.{alive}.zz.part.png", ".hidden-by-user", "notes.txt",
            ".solution.vtu.k3j2.part.vtu"]  # the old naming without a pid: not ours to judge
    for name in debris + keep:
        (tmp_path / name).write_text("partial")
    write_text(tmp_path / "report.txt", "done")  # any write sweeps its folder first
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(keep + ["report.txt"])


def test_commit_journal_of_a_dead_writer_is_completed(tmp_path):
    # A writer killed between the renames of its set: solution.vtu renamed, the
    # other two still under their temporary names, the journal in place.
    gone = dead_pid()
    for name in RESULTS:
        (tmp_path / name).write_text(f"old {name}")
    temps = {name: f".{name}.{gone}.t{i}.part{Path(name).suffix}"
             for i, name in enumerate(RESULTS)}
    for name, tmp in temps.items():
        (tmp_path / tmp).write_text(f"new {name}")
    os.replace(tmp_path / temps["solution.vtu"], tmp_path / "solution.vtu")
    journal = tmp_path / f".lapsolve-commit.{gone}.j1.json"
    journal.write_text(json.dumps({"renames": [[t, n] for n, t in temps.items()]}))
    assert (tmp_path / "summary.json").read_text() == "old summary.json"  # mixed set
    sweep(tmp_path)
    assert {n: (tmp_path / n).read_text() for n in RESULTS} == {n: f"new {n}"
                                                                for n in RESULTS}
    assert hidden(tmp_path) == []


def test_killed_between_renames_in_a_real_process(tmp_path):
    # The writer dies (os._exit, like SIGKILL) right after its first rename.
    code = f"""
import os
from lapsolve.atomic import OutputSet
real = os.replace
count = []
def replace(a, b):
    real(a, b)
    if not str(b).endswith('.json') or 'commit' not in str(b):
        count.append(b)
        if len(count) == 1:
            os._exit(9)
os.replace = replace
with OutputSet({str(tmp_path)!r}) as out:
    for name in {RESULTS!r}:
        out.text(name, 'new ' + name)
    out.commit()
"""
    for name in RESULTS:
        (tmp_path / name).write_text(f"old {name}")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert proc.returncode == 9, proc.stderr
    contents = {n: (tmp_path / n).read_text() for n in RESULTS}
    assert sorted(contents.values()) != sorted(f"old {n}" for n in RESULTS)  # it was mixed
    assert any(n.startswith(".lapsolve-commit.") for n in hidden(tmp_path))
    write_text(tmp_path / "other.txt", "next write")  # the next writer completes the set
    assert {n: (tmp_path / n).read_text() for n in RESULTS} == {n: f"new {n}"
                                                                for n in RESULTS}
    assert hidden(tmp_path) == []


def test_a_failing_writer_leaves_nothing(tmp_path):
    with pytest.raises(RuntimeError):
        with OutputSet(tmp_path / "out") as out:
            out.text("a.txt", "complete")
            out.path("b.vtu").write_text("half")
            raise RuntimeError("the writer failed")
    assert not (tmp_path / "out").exists()
    (tmp_path / "keep.txt").write_text("old")
    with pytest.raises(ZeroDivisionError):
        with atomic_path(tmp_path / "keep.txt") as tmp:
            tmp.write_text("new but doomed")
            1 / 0
    assert (tmp_path / "keep.txt").read_text() == "old" and hidden(tmp_path) == []


def test_unwritable_outputs_are_input_errors(tmp_path, capsys):
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder")
    with pytest.raises(InputError, match="cannot write output"):
        write_text(blocker / "x.json", "{}")
    with pytest.raises(InputError, match="cannot write output"):
        with OutputSet(blocker / "sub") as out:
            out.text("x.json", "{}")
    problem = tmp_path / "p.toml"
    problem.write_text(COAX_TOML.replace("max_size = 0.15", "max_size = 0.5"))
    code = main(["solve", str(problem), "--no-plot", "--out", str(blocker)])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1
    assert err.startswith(f"lapsolve: error: {blocker}: cannot write output: ")


def test_outputs_get_ordinary_permissions(tmp_path):
    mask = os.umask(0o027)
    try:
        write_text(tmp_path / "a.txt", "x")
        with OutputSet(tmp_path) as out:
            out.text("b.txt", "y")
            out.commit()
    finally:
        os.umask(mask)
    for name in ("a.txt", "b.txt"):
        assert (tmp_path / name).stat().st_mode & 0o777 == 0o640


# --------------------------------------------------------------------------- SIGKILL
def check_files(folder):
    """Every result under its final name is complete; returns (summary, u max, png)."""
    names = visible(folder)
    assert names == sorted(RESULTS), names
    summary = json.loads((folder / "summary.json").read_text())
    u = meshio.read(folder / "solution.vtu").point_data["u"]
    png = (folder / "field.png").read_bytes()
    assert png.startswith(PNG_HEAD) and png.endswith(PNG_TAIL)
    return summary, float(np.max(u)), png


def snapshot(folder):
    return {name: (folder / name).read_bytes() for name in RESULTS}


def problem_text(trial):
    """The coax problem; the inner conductor's voltage and the title identify the run."""
    return (COAX_TOML.replace('title = "coax"', f'title = "trial{trial}"')
            .replace("value = 1.0", f"value = {trial + 1}.0")
            .replace("max_size = 0.15", "max_size = 0.08"))


def test_sigkill_at_random_moments_never_leaves_a_partial_result(tmp_path):
    out = tmp_path / "out"
    problem = tmp_path / "problem.toml"
    problem.write_text(problem_text(0))
    start = time.perf_counter()
    subprocess.run(CLI + ["solve", str(problem), "--out", str(out)], check=True,
                   capture_output=True)
    duration = time.perf_counter() - start
    summary, u_max, _ = check_files(out)
    # Half the kills fall anywhere in the run, half in its writing phase (the last
    # seconds["write"] before the process exits).
    writing = min(summary["seconds"]["write"], 0.8 * duration)
    assert summary["problem"] == "trial0" and u_max == pytest.approx(1.0)
    previous, previous_trial = snapshot(out), 0
    rng = random.Random(20240611)  # reproducible kill times
    outcomes = []
    for trial in range(1, 7):
        problem.write_text(problem_text(trial))
        proc = subprocess.Popen(CLI + ["solve", str(problem), "--out", str(out)],
                                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        if trial % 2:
            time.sleep(rng.uniform(0.2, 1.0) * duration)
        else:
            time.sleep(duration - rng.uniform(0.0, 1.0) * writing)
        finished = proc.poll() is not None
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        debris = hidden(out)
        journaled = any(n.startswith(".lapsolve-commit.") for n in debris)
        if journaled:  # killed between renames: the next write completes the set
            sweep(out)
        summary, u_max, png = check_files(out)
        if summary["problem"] == f"trial{trial}":  # the new set, complete and consistent
            assert u_max == pytest.approx(trial + 1.0)
            assert png != previous["field.png"]
            outcomes.append("finished" if finished else "new set" + (
                " (journal completed)" if journaled else ""))
        else:  # the earlier set, byte for byte
            assert summary["problem"] == f"trial{previous_trial}"
            assert snapshot(out) == previous
            outcomes.append("earlier set intact" + (
                f" ({len(debris)} temporary files left)" if debris else ""))
        if summary["problem"] == f"trial{trial}":
            previous, previous_trial = snapshot(out), trial
    # the next complete run leaves no debris of the killed ones
    problem.write_text(problem_text(9))
    subprocess.run(CLI + ["solve", str(problem), "--out", str(out)], check=True,
                   capture_output=True)
    summary, u_max, _ = check_files(out)
    assert summary["problem"] == "trial9" and u_max == pytest.approx(10.0)
    assert hidden(out) == [], hidden(out)
    print("SIGKILL outcomes:", outcomes)


# --------------------------------------------------------------------------- Ctrl-C
def test_sigint_during_a_study_saves_the_finished_levels_marked_incomplete(tmp_path):
    pty = pytest.importorskip("pty", reason="needs a pseudo-terminal to follow progress")
    from importlib.metadata import entry_points

    if "study" not in {ep.name for ep in entry_points(group="lapsolve.commands")}:
        pytest.skip("'lapsolve study' is not available in this installation")
    out = tmp_path / "study"
    # The progress bar draws only on a terminal: give the child a pseudo-terminal as
    # stderr and read "done/total" from it to interrupt after two finished levels.
    master, slave = pty.openpty()
    proc = subprocess.Popen(CLI + ["study", "lshape", "--order", "1", "--levels", "8",
                                   "--no-pictures", "--out", str(out)],
                            stdout=subprocess.DEVNULL, stderr=slave, stdin=subprocess.DEVNULL)
    os.close(slave)
    seen, done, deadline = b"", 0, time.monotonic() + 120
    try:
        while done < 2 and time.monotonic() < deadline and proc.poll() is None:
            try:
                seen += os.read(master, 4096)
            except OSError:
                break
            found = re.findall(rb"\] (\d+)/(\d+)", seen)
            done = int(found[-1][0]) if found else 0
        assert done >= 2, seen[-300:]
        proc.send_signal(signal.SIGINT)
        code = proc.wait(timeout=120)
    finally:
        if proc.poll() is None:
            proc.kill()
        os.close(master)
    assert code == 130
    study = json.loads((out / "study.json").read_text())
    assert study["incomplete"] is True and study["studies"][0]["incomplete"] is True
    # the levels finished before the interrupt are kept, with their errors
    levels = study["studies"][0]["levels"]
    assert done <= len(levels) < 8
    assert all(np.isfinite(level["errors"]["L2"]) for level in levels)
    assert hidden(out) == []


def test_ctrl_c_during_certify_exits_130_and_writes_nothing(tmp_path, capsys, monkeypatch):
    from verification import certify as certify_module

    calls = []

    def interrupted(*args, **kwargs):
        calls.append(1)
        raise KeyboardInterrupt

    monkeypatch.setattr(certify_module, "certify_slot", interrupted)
    manifest = tmp_path / "manifest.json"
    manifest.write_text(json.dumps({
        "schema": certify_module.MANIFEST_SCHEMA, "levels": [0, 1], "orders": [1],
        "cases": [{"name": "coax", "levels": [], "orders": {
            "1": {"expected_orders": {"L2": 2.0, "H1": 1.0, "qoi": 2.0}}}}]}))
    (tmp_path / "results").mkdir()
    code = main(["certify", str(manifest), "--results", str(tmp_path / "results"),
                 "--out", str(tmp_path / "cert")])
    assert code == 130 and calls == [1]
    assert capsys.readouterr().err.strip() == "lapsolve: interrupted"
    assert not (tmp_path / "cert").exists()


def test_module_names_its_writer_pid_pattern():
    # the sweep relies on the documented name pattern; keep the two in step
    assert atomic._TEMP.match(".summary.json.123.ab_9.part.json")
    assert not atomic._TEMP.match("summary.json")
    assert atomic._JOURNAL.match(".lapsolve-commit.77.x1y2.json")
