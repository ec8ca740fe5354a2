"""Outputs never harm anything (rateabs.files): inputs are never written over, only regular files
are written, temporaries are unique and never left behind, each --out folder carries a manifest
so that a rerun clears exactly its predecessor's files, and one run writes into a folder at a
time. Commands are run as a user runs them (click's runner, or real processes side by side).
"""

from __future__ import annotations

import errno
import hashlib
import json
import os
import shutil
import stat
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest
from click.testing import CliRunner
from helpers import side_by_side_results, start_side_by_side

from rateabs import files
from rateabs.cli import main
from rateabs.errors import UsageError
from rateabs.files import LOCK, MANIFEST, TMP_SUFFIX, RunOutputs, read_manifest, write_atomic

ROOT = Path(__file__).resolve().parents[1]
ENV = {**os.environ, "PYTHONPATH": str(ROOT)}


def small_run(path: Path, slope: float = 0.002) -> Path:
    """Two straight traces (absorbance vs s) with a known slope: quick to analyse."""
    rows = ["time (s),A,B"] + [f"{t},{0.1 + slope * t:.5f},{0.2 + 2 * slope * t:.5f}"
                               for t in range(0, 301, 15)]
    path.write_text("\n".join(rows) + "\n")
    return path


def cli(*args: str):
    return CliRunner().invoke(main, [str(a) for a in args])


def leftovers(folder: Path) -> list[Path]:
    return [p for p in folder.rglob("*") if p.name.endswith(TMP_SUFFIX) or p.suffix == ".tmp"]


def listed(folder: Path) -> set[str]:
    return {e["name"] for e in read_manifest(folder)["files"]}


def present(folder: Path) -> set[str]:
    return {p.relative_to(folder).as_posix() for p in folder.rglob("*")
            if p.is_file() and p.name not in (MANIFEST, LOCK)}


def one_error_line(r) -> str:
    lines = [ln for ln in r.stderr.splitlines() if ln.startswith("rateabs:")]
    assert len(lines) == 1 and "Traceback" not in r.stderr, r.stderr
    return lines[0]


# --------------------------------------------------------------------------- inputs are safe


def test_report_onto_the_input_is_refused(tmp_path):
    g = small_run(tmp_path / "g.csv")
    before = g.read_bytes()
    r = cli("rates", g, "--report", g)
    assert r.exit_code == 2
    assert "never writes over its inputs" in one_error_line(r)
    assert g.read_bytes() == before and not leftovers(tmp_path)


def test_out_that_would_replace_the_input_is_refused_before_anything_is_written(
        tmp_path, monkeypatch):
    small_run(tmp_path / "rates.csv")
    before = (tmp_path / "rates.csv").read_bytes()
    monkeypatch.chdir(tmp_path)
    r = cli("rates", "rates.csv", "--out", ".")
    assert r.exit_code == 2 and "rates.csv" in one_error_line(r)
    assert (tmp_path / "rates.csv").read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["rates.csv"]


@pytest.mark.parametrize("how", ["dotdot", "symlink", "hardlink", "symlinked-folder"])
def test_input_reached_by_another_path_is_refused(tmp_path, how):
    g = small_run(tmp_path / "g.csv")
    before = g.read_bytes()
    (tmp_path / "sub").mkdir()
    if how == "dotdot":
        target = tmp_path / "sub" / ".." / "g.csv"
    elif how == "symlink":
        target = tmp_path / "sub" / "report.html"
        target.symlink_to(g)
    elif how == "hardlink":
        target = tmp_path / "sub" / "report.html"
        os.link(g, target)
    else:
        (tmp_path / "alias").symlink_to(tmp_path)
        target = tmp_path / "alias" / "g.csv"
    r = cli("rates", g, "--report", target)
    assert r.exit_code == 2 and "never writes over its inputs" in one_error_line(r)
    assert g.read_bytes() == before


def test_layout_file_is_an_input_too(tmp_path):
    g = small_run(tmp_path / "g.csv")
    lay = tmp_path / "out" / "rates.csv"
    lay.parent.mkdir()
    lay.write_text("well,role\nA,sample\nB,sample\n")
    before = lay.read_bytes()
    r = cli("rates", g, "--layout", lay, "--out", tmp_path / "out")
    assert r.exit_code == 2 and lay.read_bytes() == before


def test_files_inside_an_input_folder_are_kept(tmp_path):
    run = RunOutputs("grade", [tmp_path], out=tmp_path)
    (tmp_path / "roster.csv").write_text("student,file,reported\n")
    with pytest.raises(UsageError, match="inside the input folder"), run:
        run.write_in("roster.csv", "overwritten")
    assert (tmp_path / "roster.csv").read_text() == "student,file,reported\n"
    with RunOutputs("grade", [tmp_path], out=tmp_path) as again:  # new names are fine
        again.write_in("gradebook.csv", "a\n")


def test_grade_into_its_own_class_folder_reruns_cleanly(tmp_path):
    from rateabs.simulate import first_order_class

    c = first_order_class(tmp_path / "c", 3)
    inputs = {p.name: p.read_bytes() for p in c.iterdir()}
    for _ in range(2):
        r = cli("grade", c, "--rubric", c / "rubric.toml", "--jobs", "1", "--out", c)
        assert r.exit_code == 0, r.stderr
    assert {p.name: p.read_bytes() for p in c.iterdir() if p.name in inputs} == inputs
    assert present(c) - set(inputs) == listed(c)


# --------------------------------------------------------------------------- only regular files


@pytest.mark.parametrize("device", ["/dev/full", "/dev/null"])
def test_a_device_is_never_replaced(tmp_path, device):
    if not Path(device).exists():
        pytest.skip(f"no {device}")
    g = small_run(tmp_path / "g.csv")
    r = cli("rates", g, "--report", device)
    assert r.exit_code == 2 and "is a device" in one_error_line(r)
    assert stat.S_ISCHR(os.stat(device).st_mode)


def test_a_fifo_or_a_folder_is_refused(tmp_path):
    g = small_run(tmp_path / "g.csv")
    os.mkfifo(tmp_path / "pipe")
    (tmp_path / "folder").mkdir()
    r = cli("rates", g, "--report", tmp_path / "pipe")
    assert r.exit_code == 2 and "FIFO" in one_error_line(r)
    assert stat.S_ISFIFO(os.stat(tmp_path / "pipe").st_mode)
    with pytest.raises(UsageError, match="is a folder"):
        write_atomic(tmp_path / "folder", "x")
    with pytest.raises(UsageError, match="FIFO"):
        write_atomic(tmp_path / "pipe", "x")


def test_a_symlink_is_written_through_and_stays_a_link(tmp_path):
    g = small_run(tmp_path / "g.csv")
    real = tmp_path / "site" / "page.html"
    real.parent.mkdir()
    real.write_text("old page")
    link = tmp_path / "report.html"
    link.symlink_to(real)
    r = cli("rates", g, "--report", link)
    assert r.exit_code == 0, r.stderr
    assert link.is_symlink() and os.readlink(link) == str(real)
    assert real.read_text().startswith("<!DOCTYPE html>")
    assert f"replacing {link}" in r.stderr


# --------------------------------------------------------------------------- temporaries


def test_temporary_names_are_unique_and_beside_the_target(tmp_path):
    names = {files._tmp_path(tmp_path / "rates.json").name for _ in range(200)}
    assert len(names) == 200
    assert all(n.startswith(".rates.json.") and n.endswith(TMP_SUFFIX) for n in names)


REAL_FDOPEN = os.fdopen


class FullDisk:
    """A file object whose write fails as a full disk does."""

    def __init__(self, fd, mode):
        self.fh = REAL_FDOPEN(fd, mode)

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.fh.close()

    def write(self, data):
        self.fh.write(data[: len(data) // 2])
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))


def test_a_full_disk_is_one_line_and_leaves_no_temporary(tmp_path, monkeypatch):
    g = small_run(tmp_path / "g.csv")
    monkeypatch.setattr(files.os, "fdopen", FullDisk)
    r = cli("rates", g, "--out", tmp_path / "out")
    assert r.exit_code == 2
    assert "no space left on device" in one_error_line(r)
    assert not leftovers(tmp_path)


def test_ctrl_c_while_writing_leaves_no_temporary_and_marks_the_manifest(tmp_path, monkeypatch):
    hits = []

    def interrupted(fd, mode):                     # Ctrl-C once, in the middle of a write
        if hits:
            return REAL_FDOPEN(fd, mode)
        hits.append(fd)
        os.close(fd)
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        with RunOutputs("rates", out=tmp_path) as run:
            run.write_in("a.csv", "1\n")
            monkeypatch.setattr(files.os, "fdopen", interrupted)
            run.write_in("b.csv", "2\n")
    assert hits and not leftovers(tmp_path)
    m = read_manifest(tmp_path)
    assert m["status"] == "interrupted" and present(tmp_path) == {"a.csv"}


@pytest.fixture
def tiny_disk(tmp_path):
    """A 256 kB tmpfs (needs root and mount; skipped elsewhere), always unmounted."""
    mnt = tmp_path / "tiny"
    mnt.mkdir()
    if not shutil.which("mount") or os.geteuid() != 0 or subprocess.run(
            ["mount", "-t", "tmpfs", "-o", "size=256k", "tmpfs", str(mnt)],
            capture_output=True).returncode:
        pytest.skip("cannot mount a small tmpfs here")
    try:
        yield mnt
    finally:
        subprocess.run(["umount", str(mnt)], check=False)


def test_a_really_full_disk(tmp_path, tiny_disk):
    g = small_run(tmp_path / "g.csv")
    chunks = []
    try:                                           # fill it, then free six 4 kB pages
        while True:
            chunks.append(tiny_disk / f"filler{len(chunks)}")
            chunks[-1].write_bytes(b"\0" * 4096)
    except OSError as exc:
        assert exc.errno == errno.ENOSPC
    for c in chunks[:6]:
        c.unlink()
    r = cli("rates", g, "--out", tiny_disk / "out")
    assert r.exit_code == 2, r.stderr
    assert "no space left on device" in one_error_line(r)
    assert not leftovers(tiny_disk)


def test_temporaries_of_a_killed_run_are_cleared_by_the_next(tmp_path):
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True).stdout.strip()
    stale = tmp_path / f".rates.json.{dead}.0a1b2c3d{TMP_SUFFIX}"
    stale.write_text("half")
    with RunOutputs("rates", out=tmp_path) as run:
        run.write_in("rates.json", "{}")
    assert not stale.exists()


def test_outside_a_run_writes_are_atomic_and_regular(tmp_path):
    p = write_atomic(tmp_path / "new" / "x.txt", "hello")
    assert p.read_text() == "hello" and not leftovers(tmp_path)
    os.chmod(p, 0o640)
    write_atomic(p, b"again")
    assert p.read_bytes() == b"again" and stat.S_IMODE(os.stat(p).st_mode) == 0o640


# --------------------------------------------------------------------------- the manifest


def test_manifest_lists_exactly_the_files_with_their_digests(tmp_path):
    g = small_run(tmp_path / "g.csv")
    r = cli("rates", g, "--out", tmp_path / "out")
    assert r.exit_code == 0, r.stderr
    out = tmp_path / "out"
    m = read_manifest(out)
    assert (m["command"], m["status"], m["inputs"]) == ("rates", "complete", [str(g)])
    assert m["started"] <= m["finished"]
    assert listed(out) == present(out) and {"rates.json", "rates.csv"} <= listed(out)
    for e in m["files"]:
        data = (out / e["name"]).read_bytes()
        assert (e["bytes"], e["sha256"]) == (len(data), hashlib.sha256(data).hexdigest())


def test_a_rerun_removes_only_its_predecessors_files(tmp_path):
    out = tmp_path / "out"
    g = small_run(tmp_path / "g.csv")
    assert cli("rates", g, "--out", out).exit_code == 0
    first = listed(out)
    (out / "my_notes.txt").write_text("mine")                      # the user's own file
    r = cli("inspect", g, "--out", out)
    assert r.exit_code == 0, r.stderr
    assert f"{out}: removed the {len(first)} file(s) of the previous rates run" in r.stderr
    assert present(out) == listed(out) | {"my_notes.txt"}
    assert not (listed(out) & first) and not (out / "rates.json").exists()


def test_a_file_changed_since_is_kept_and_said(tmp_path):
    with RunOutputs("rates", out=tmp_path) as run:
        run.write_in("rates.csv", "a\n")
        run.write_in("plot.png", b"png")
    (tmp_path / "rates.csv").write_text("edited by hand\n")
    told = []
    with RunOutputs("inspect", out=tmp_path, notify=told.append) as run:
        run.write_in("inspect.csv", "b\n")
    assert (tmp_path / "rates.csv").read_text() == "edited by hand\n"
    assert not (tmp_path / "plot.png").exists()
    assert any("kept 1 file(s)" in t and "changed since" in t for t in told)


def test_the_manifest_and_lock_are_not_outputs(tmp_path):
    with RunOutputs("rates", out=tmp_path) as run:
        for name in (MANIFEST, LOCK):
            with pytest.raises(UsageError, match="own record"):
                run.write_in(name, "x")
    assert read_manifest(tmp_path)["status"] == "complete"


def test_a_hostile_manifest_removes_nothing_outside(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    victim = tmp_path / "victim.txt"
    victim.write_text("keep me")
    fake = {"format": files.MANIFEST_FORMAT, "command": "x", "files": [
        {"name": "../victim.txt"}, {"name": str(victim)}, {"name": ""}, "junk"]}
    (out / MANIFEST).write_text(json.dumps(fake))
    with RunOutputs("rates", out=out) as run:
        run.write_in("a.csv", "1\n")
    assert victim.read_text() == "keep me"


def test_a_previous_output_that_is_now_an_input_is_kept(tmp_path):
    with RunOutputs("rates", out=tmp_path) as run:
        run.write_in("rates.csv", "conc,rate\n1,2\n")
        run.write_in("rates.json", "{}")
    told = []
    with RunOutputs("saturation", [tmp_path / "rates.csv"], out=tmp_path,
                    notify=told.append) as run:
        run.write_in("saturation.json", "{}")
    assert (tmp_path / "rates.csv").read_text() == "conc,rate\n1,2\n"
    assert not (tmp_path / "rates.json").exists()
    assert any("rates.csv (an input of this run)" in t for t in told)


def test_replacing_files_no_run_listed_is_said(tmp_path):
    g = small_run(tmp_path / "g.csv")
    out = tmp_path / "out"
    out.mkdir()
    (out / "rates.json").write_text("from somewhere else")
    r = cli("rates", g, "--out", out, "--no-plots")
    assert r.exit_code == 0
    assert "replaced 1 existing file(s) that no earlier rateabs run had listed: rates.json" \
        in r.stderr


# --------------------------------------------------------------------------- folders


@pytest.mark.parametrize("case", ["missing-report-folder", "report-under-a-file",
                                  "out-under-a-file"])
def test_unusable_targets_are_one_line_usage_errors(tmp_path, case):
    g = small_run(tmp_path / "g.csv")
    (tmp_path / "plain.txt").write_text("x")
    args = {"missing-report-folder": ["--report", tmp_path / "nowhere" / "r.html"],
            "report-under-a-file": ["--report", tmp_path / "plain.txt" / "r.html"],
            "out-under-a-file": ["--out", tmp_path / "plain.txt" / "out"]}[case]
    r = cli("rates", g, *args)
    assert r.exit_code == 2
    assert "internal error" not in one_error_line(r)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["g.csv", "plain.txt"]


def test_report_inside_a_new_out_folder(tmp_path):
    g = small_run(tmp_path / "g.csv")
    out = tmp_path / "new" / "deeper"
    r = cli("rates", g, "--out", out, "--report", out / "pages" / "report.html")
    assert r.exit_code == 0, r.stderr
    assert "pages/report.html" in listed(out) and listed(out) == present(out)


def test_report_onto_the_runs_own_output_is_refused(tmp_path):
    g = small_run(tmp_path / "g.csv")
    r = cli("rates", g, "--out", tmp_path / "o", "--report", tmp_path / "o" / "rates.json")
    assert r.exit_code == 2 and "own outputs" in one_error_line(r)


def test_out_that_is_a_file_is_refused(tmp_path):
    (tmp_path / "plain.txt").write_text("x")
    with pytest.raises(UsageError, match="is a file, not a folder"):
        RunOutputs("rates", out=tmp_path / "plain.txt").open()


@pytest.fixture
def read_only_folder(tmp_path):
    """A folder nobody may write into: a read-only tmpfs as root (who ignores permission
    bits), a mode-555 folder otherwise; always released."""
    ro = tmp_path / "ro"
    ro.mkdir()
    if os.geteuid() != 0:
        os.chmod(ro, 0o555)
        yield ro
        os.chmod(ro, 0o755)
        return
    if not shutil.which("mount") or subprocess.run(
            ["mount", "-t", "tmpfs", "-o", "ro,size=64k", "tmpfs", str(ro)],
            capture_output=True).returncode:
        pytest.skip("cannot mount a read-only tmpfs here")
    try:
        yield ro
    finally:
        subprocess.run(["umount", str(ro)], check=False)


@pytest.mark.parametrize("option", ["--out", "--report"])
def test_read_only_folder_is_a_one_line_usage_error(tmp_path, read_only_folder, option):
    g = small_run(tmp_path / "g.csv")
    target = read_only_folder / ("out" if option == "--out" else "r.html")
    r = cli("rates", g, option, target)
    assert r.exit_code == 2
    line = one_error_line(r)
    assert "read-only" in line or "not writable" in line or "permission denied" in line


# --------------------------------------------------------------------------- one writer


HOLDER = textwrap.dedent("""
    import fcntl, os, sys, time
    fd = os.open(sys.argv[1], os.O_RDWR | os.O_CREAT)
    fcntl.flock(fd, fcntl.LOCK_EX)
    os.write(fd, b"pid %d, rates" % os.getpid())
    print("held", flush=True)
    time.sleep(float(sys.argv[2]))
""")


def _hold_lock(folder: Path, seconds: float) -> subprocess.Popen:
    folder.mkdir(exist_ok=True)
    p = subprocess.Popen([sys.executable, "-c", HOLDER, str(folder / LOCK), str(seconds)],
                         stdout=subprocess.PIPE, text=True)
    assert p.stdout.readline().strip() == "held"
    return p


@pytest.mark.skipif(files.fcntl is None, reason="no advisory locks on this platform")
def test_a_folder_in_use_is_refused_after_the_wait(tmp_path):
    p = _hold_lock(tmp_path, 60)
    try:
        with pytest.raises(UsageError) as e, RunOutputs("rates", out=tmp_path, wait=0.3):
            pass
        assert f"another rateabs run (pid {p.pid}, rates) is writing" in e.value.one_line()
    finally:
        p.kill()
        p.wait(timeout=30)


@pytest.mark.skipif(files.fcntl is None, reason="no advisory locks on this platform")
def test_a_folder_in_use_is_waited_for(tmp_path):
    p = _hold_lock(tmp_path, 1.0)
    told = []
    try:
        with RunOutputs("rates", out=tmp_path, notify=told.append, wait=120) as run:
            assert p.poll() is not None                           # it got in only after
            run.write_in("a.csv", "1\n")
    finally:
        p.kill()
        p.wait(timeout=30)
    assert len(told) == 1 and "is writing here; waiting for it" in told[0]


LAYER_WRITER = textwrap.dedent("""
    import os, sys, time
    from rateabs.files import RunOutputs
    out, run_id, go = sys.argv[1], int(sys.argv[2]), sys.argv[3]
    while not os.path.exists(go):                   # all start together
        time.sleep(0.01)
    with RunOutputs("test", [], out=out) as run:
        run.write_in("result.json", '{"run": %d}' % run_id)
        for k in range(3 + run_id % 5):             # runs leave different numbers of plots
            run.write_in("plots/p%d.png" % k, b"run %d" % run_id)
        run.write_in("result.csv", "run\\n%d\\n" % run_id)
""")


def test_many_writers_side_by_side_on_the_file_layer(tmp_path):
    """Eight processes at once, five rounds: every run completes, the folder is always one
    run's, nothing temporary is left."""
    out = tmp_path / "shared"
    runs = crashes = 0
    for rnd in range(5):
        go = tmp_path / f"go{rnd}"
        p = start_side_by_side("import rateabs.files", LAYER_WRITER,
                               [["w", str(out), str(8 * rnd + i), str(go)] for i in range(8)],
                               ENV)
        go.touch()
        for code, err in side_by_side_results(p, timeout=120):
            runs += 1
            crashes += code != 0 or "Traceback" in err
        assert not leftovers(out)
        m = read_manifest(out)
        run_id = json.loads((out / "result.json").read_text())["run"]
        assert m["status"] == "complete" and listed(out) == present(out)
        assert (out / "result.csv").read_text() == f"run\n{run_id}\n"
        assert {p.read_bytes() for p in (out / "plots").iterdir()} == {b"run %d" % run_id}
        assert len(list((out / "plots").iterdir())) == 3 + run_id % 5
    assert (runs, crashes) == (40, 0)


WRITER = textwrap.dedent("""
    import sys
    from rateabs.cli import main
    sys.argv = ["rateabs", "rates", sys.argv[1], "--out", sys.argv[2], "--no-curve", "--no-plots"]
    main()
""")
#: run once before the writers are forked, so that they start with what `rates` imports: the
#: same command on argv[1] without --out (nothing written), its output thrown away
WARM_UP = textwrap.dedent("""
    import contextlib, os, sys
    from rateabs.cli import main
    with open(os.devnull, "w") as null, contextlib.redirect_stdout(null), \\
            contextlib.redirect_stderr(null):
        main(["rates", sys.argv[1], "--no-curve", "--no-plots"], standalone_mode=False)
""")


def test_rates_side_by_side_never_crash_nor_mix(tmp_path):
    """Two rounds of four `rates` runs on four different inputs into one folder, all at once
    (benchmarks/side_by_side_writers.py runs hundreds)."""
    out = tmp_path / "shared"
    inputs = [small_run(tmp_path / f"run{i}.csv", slope=0.001 * (i + 1)) for i in range(4)]
    expected = {}                                    # each input's own rates.csv, run alone
    for g in inputs:
        r = cli("rates", g, "--no-curve", "--format", "csv")
        expected[str(g)] = r.stdout
    runs = crashes = 0
    for _ in range(2):
        p = start_side_by_side(WARM_UP, WRITER, [["w", str(g), str(out)] for g in inputs], ENV,
                               [str(inputs[0])])
        for code, err in side_by_side_results(p):
            runs += 1
            crashes += code != 0 or "Traceback" in err or "internal error" in err
        assert not leftovers(out)
        m = read_manifest(out)
        assert m["status"] == "complete" and listed(out) == present(out)
        doc = json.loads((out / "rates.json").read_text())
        assert m["inputs"] == doc["inputs"]                   # json and csv from one run
        assert (out / "rates.csv").read_text() == expected[doc["inputs"][0]]
        for e in m["files"]:
            assert hashlib.sha256((out / e["name"]).read_bytes()).hexdigest() == e["sha256"]
    assert (runs, crashes) == (8, 0)
