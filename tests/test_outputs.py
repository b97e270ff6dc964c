"""The output folder (src/egressmargin/outputs.py): never lose a user's files.

Contract ("Command line", added in turn 2): ``--out`` is written only when it does not
exist, is empty, or holds an earlier egressmargin output; anything else is exit 2 and
nothing is touched. A run that exits non-zero leaves no half-written output. Each numbered
case of issue 13 items 1-3 is a test here: the study folder, the data folder, an unrelated
folder, a file, a symlink, ``.``, ``..``, an unwritable parent (all refused before
computing), an earlier output replaced, an earlier output with a user's file refused or
(with ``--force``) kept, SIGTERM and SIGINT, two runs on one folder. Exit statuses after a
signal follow the shell convention 128 + signal number (POSIX.1-2017, Shell Command
Language, 2.8.2 "Exit Status for Commands").

Runs use the small fixture of tests/conftest.py with ``--no-pdf`` and few samples.
"""

from __future__ import annotations

import errno
import fcntl
import json
import os
import signal
import subprocess
import sys
import tempfile
import textwrap
import types
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import egressmargin
from egressmargin import outputs, pipeline

REPO = Path(__file__).resolve().parent.parent
RUN = ["--no-pdf", "--samples", "20", "--quiet"]


def tree(folder: Path) -> dict[str, bytes | None]:
    """Every entry under ``folder`` (hidden ones too) with its bytes (None for folders and links)."""
    out = {}
    for p in sorted(Path(folder).rglob("*")):
        rel = str(p.relative_to(folder))
        out[rel] = p.read_bytes() if p.is_file() and not p.is_symlink() else None
    return out


def _no_compute(*args, **kwargs):
    raise AssertionError("computed before the output folder was checked")


@pytest.fixture
def no_compute(monkeypatch):
    """Make computing fail loudly: a refusal must come before it."""
    monkeypatch.setattr(pipeline, "build_results", _no_compute)


@pytest.fixture
def refused(cli, monkeypatch):
    """``run STUDY --out OUT``: exit 2, nothing computed, nothing under ``watch`` changed; returns stderr."""
    def check(study: Path, out, watch: Path, *extra) -> str:
        before = tree(watch)
        with monkeypatch.context() as m:
            m.setattr(pipeline, "build_results", _no_compute)
            status, _, err = cli(["run", study, "--out", out, *RUN, *extra])
        assert status == 2, err
        assert tree(watch) == before, "files changed despite the refusal"
        assert "--out: error:" in err and "nothing was changed" in err
        return err
    return check


# --------------------------------------------------------------------------- refusals (issue 13, items 1-2)


def test_study_folder_as_out_is_refused(refused, good_study, tmp_path):
    err = refused(good_study, good_study.parent, tmp_path)
    assert "holds a study input" in err and "study.yaml" in err


def test_data_folder_as_out_is_refused(refused, kit, make_study, tmp_path):
    """The histories in ``data/`` beside the study: neither data/ nor a folder above it may be written."""
    study = make_study(kit.study.replace("histories: fire-a.csv", "histories: data/fire-a.csv"), csv=False)
    (study.parent / "data").mkdir()
    (study.parent / "data" / "fire-a.csv").write_text(kit.csv, encoding="utf-8")
    err = refused(study, study.parent / "data", tmp_path)
    assert "holds a study input" in err and "fire-a.csv" in err
    err = refused(study, tmp_path, tmp_path)            # a folder whose subtree holds the inputs
    assert "holds a study input" in err


def test_a_study_input_itself_as_out_is_refused(refused, good_study, tmp_path):
    err = refused(good_study, good_study.parent / "fire-a.csv", tmp_path)
    assert "is a study input" in err


def test_unrelated_non_empty_folder_is_refused(refused, good_study, tmp_path):
    project = tmp_path / "myproject"
    (project / "src").mkdir(parents=True)
    (project / "src" / "main.c").write_text("int main(void) { return 0; }\n", encoding="utf-8")
    (project / "notes.txt").write_text("mine\n", encoding="utf-8")
    err = refused(good_study, project, tmp_path)
    assert "not an earlier egressmargin output" in err and "'notes.txt'" in err and "src/" in err
    err = refused(good_study, project, tmp_path, "--force")   # --force is only for earlier outputs
    assert "--force applies only to an earlier egressmargin output" in err


def test_file_as_out_is_refused(refused, good_study, tmp_path):
    target = tmp_path / "results.txt"
    target.write_text("keep me\n", encoding="utf-8")
    err = refused(good_study, target, tmp_path)
    assert "is a file, not a folder" in err


def test_symlink_as_out_is_refused(refused, good_study, tmp_path):
    real = tmp_path / "real-out"
    real.mkdir()
    (tmp_path / "link-out").symlink_to(real)
    err = refused(good_study, tmp_path / "link-out", tmp_path)
    assert "is a symbolic link" in err and "real-out" in err
    (tmp_path / "dangling").symlink_to(tmp_path / "nowhere")
    assert "is a symbolic link" in refused(good_study, tmp_path / "dangling", tmp_path)


@pytest.mark.parametrize("name, words", [(".", "is the current folder"), ("..", "is the folder above the current one")])
def test_dot_and_dotdot_are_refused(refused, good_study, tmp_path, monkeypatch, name, words):
    cwd = tmp_path / "work" / "cwd"
    cwd.mkdir(parents=True)
    monkeypatch.chdir(cwd)
    assert words in refused(good_study, name, tmp_path)


def test_current_folder_or_an_ancestor_by_name_is_refused(refused, good_study, tmp_path, monkeypatch):
    cwd = tmp_path / "work" / "cwd"
    cwd.mkdir(parents=True)
    monkeypatch.chdir(cwd)
    assert "is the current folder" in refused(good_study, cwd, tmp_path)
    assert "holds the current one" in refused(good_study, tmp_path / "work", tmp_path)


@pytest.mark.skipif(not Path("/sys").is_dir(), reason="needs Linux /sys (unwritable even for root)")
def test_unwritable_parent_is_refused_before_computing(cli, no_compute, good_study):
    status, _, err = cli(["run", good_study, "--out", "/sys/egressmargin-test-out", *RUN])
    assert status == 2, err
    assert "/sys" in err and ("ermission denied" in err or "not permitted" in err)
    assert not Path("/sys/egressmargin-test-out").exists()


@pytest.mark.skipif(os.geteuid() == 0, reason="root may write in any folder")
def test_read_only_parent_is_refused_before_computing(cli, no_compute, good_study, tmp_path):
    parent = tmp_path / "locked"
    parent.mkdir()
    parent.chmod(0o500)
    try:
        status, _, err = cli(["run", good_study, "--out", parent / "out", *RUN])
    finally:
        parent.chmod(0o700)
    assert status == 2 and "cannot write in" in err and str(parent) in err
    assert list(parent.iterdir()) == []


def test_parent_that_is_a_file_is_refused(cli, no_compute, good_study, tmp_path):
    (tmp_path / "plain").write_text("x", encoding="utf-8")
    status, _, err = cli(["run", good_study, "--out", tmp_path / "plain" / "out", *RUN])
    assert status == 2 and "is a file, so the folder" in err


def test_missing_parents_are_made_and_an_empty_folder_is_used(cli, good_study, tmp_path):
    status, _, err = cli(["run", good_study, "--out", tmp_path / "a" / "b" / "out", *RUN])
    assert status == 0, err
    assert (tmp_path / "a" / "b" / "out" / "results.json").is_file()
    (tmp_path / "empty").mkdir()
    status, _, err = cli(["run", good_study, "--out", tmp_path / "empty", *RUN])
    assert status == 0, err
    assert sorted(os.listdir(tmp_path / "empty")) == [outputs.MANIFEST_NAME, "results.json"]


def test_refusal_under_a_missing_parent_leaves_no_folders(cli, no_compute, good_study, tmp_path):
    """The made parents are removed again when the run stops before writing (here: a held lock)."""
    out = tmp_path / "new" / "deeper" / "out"
    with outputs.claim(out):
        status, _, err = cli(["run", good_study, "--out", out, *RUN])
        assert status == 2 and "another egressmargin run" in err
    assert not (tmp_path / "new").exists()


# --------------------------------------------------------------------------- earlier outputs


def test_manifest_names_tool_version_files_date_and_command(cli, good_study, tmp_path, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")   # 2023-11-14 22:13:20 UTC (date -u -d @1700000000)
    out = tmp_path / "out"
    status, _, err = cli(["run", good_study, "--out", out, *RUN])
    assert status == 0, err
    m = json.loads((out / outputs.MANIFEST_NAME).read_text(encoding="utf-8"))
    assert m["tool"] == "egressmargin" and m["version"] == egressmargin.__version__
    assert m["written"] == ["results.json"]
    assert m["generated_utc"] == "2023-11-14T22:13:20Z"
    assert m["command"].startswith("egressmargin run ") and "--no-pdf" in m["command"]


def test_earlier_output_with_a_user_file_is_refused(cli, refused, good_study, tmp_path):
    out = tmp_path / "out"
    assert cli(["run", good_study, "--out", out, *RUN])[0] == 0
    (out / "notes.txt").write_text("reviewer's notes\n", encoding="utf-8")
    err = refused(good_study, out, tmp_path)
    assert "did not write: 'notes.txt'" in err and "--force" in err


def test_force_replaces_only_the_tools_files(cli, good_study, tmp_path):
    out = tmp_path / "out"
    assert cli(["run", good_study, "--out", out, *RUN, "--seed", "1"])[0] == 0
    (out / "notes.txt").write_text("reviewer's notes\n", encoding="utf-8")
    (out / "mine").mkdir()
    (out / "mine" / "sketch.svg").write_text("<svg/>", encoding="utf-8")
    status, _, err = cli(["run", good_study, "--out", out, *RUN, "--seed", "2", "--force"])
    assert status == 0, err
    assert (out / "notes.txt").read_text(encoding="utf-8") == "reviewer's notes\n"
    assert (out / "mine" / "sketch.svg").read_text(encoding="utf-8") == "<svg/>"
    assert json.loads((out / "results.json").read_text(encoding="utf-8"))["seed"] == 2
    m = json.loads((out / outputs.MANIFEST_NAME).read_text(encoding="utf-8"))
    assert m["written"] == ["results.json"]                  # the user's files are not claimed
    assert sorted(os.listdir(tmp_path)) == ["out", "study"]  # no staging, set-aside or lock left


def test_force_refuses_a_user_file_under_a_name_the_tool_writes(cli, refused, good_study, tmp_path):
    out = tmp_path / "out"
    assert cli(["run", good_study, "--out", out, *RUN])[0] == 0
    (out / "report.pdf").write_bytes(b"%PDF- the user's own")
    err = refused(good_study, out, tmp_path, "--force")
    assert "'report.pdf'" in err and "move or rename it" in err


def test_a_foreign_or_broken_manifest_is_not_an_earlier_output(refused, good_study, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / outputs.MANIFEST_NAME).write_text("{not json", encoding="utf-8")
    assert "cannot be read" in refused(good_study, out, tmp_path, "--force")
    (out / outputs.MANIFEST_NAME).write_text('{"tool": "other", "written": []}', encoding="utf-8")
    assert "does not name egressmargin" in refused(good_study, out, tmp_path, "--force")


def _claim_and_write(out: Path, files: dict[str, str], force: bool = False) -> None:
    with outputs.claim(out, force=force) as target:
        for rel, text in files.items():
            (target.staging / rel).parent.mkdir(parents=True, exist_ok=True)
            (target.staging / rel).write_text(text, encoding="utf-8")
        target.commit("test", "egressmargin test")


NAMES = st.text(alphabet="abcxyz_-.0123", min_size=1, max_size=6).filter(lambda s: s not in (".", ".."))


@settings(max_examples=30, deadline=None)
@given(user=st.dictionaries(st.lists(NAMES, min_size=1, max_size=3).map("/".join), st.binary(max_size=8),
                            min_size=1, max_size=4),
       in_plots=st.booleans())
def test_force_keeps_every_user_file_byte_for_byte(user, in_plots):
    """Property: whatever files a user added to an earlier output (also inside the tool's own
    plots/ folder), ``--force`` keeps each one unchanged and the run's files are the new ones;
    without ``--force`` nothing changes at all."""
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "out"
        _claim_and_write(out, {"results.json": "old", "plots/figure-001.svg": "old"})
        placed = {}
        for rel, text in user.items():
            rel = f"plots/{rel}" if in_plots else rel
            path = out / rel
            if rel.split("/")[0] in outputs.TOOL_NAMES and not in_plots:
                continue
            if any(q.exists() and not q.is_dir() for q in [*path.parents]) or path.exists():
                continue
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(text)
            placed[rel] = text
        if not placed:
            return
        before = tree(out)
        with pytest.raises(egressmargin.errors.InputError, match="did not write"):
            _claim_and_write(out, {"results.json": "new"})
        assert tree(out) == before
        new = {"results.json": "new", "plots/figure-002.svg": "new"}
        clash = any(r in new for r in placed)
        if clash:
            with pytest.raises(egressmargin.errors.InputError):
                _claim_and_write(out, new, force=True)
            assert tree(out) == before
            return
        _claim_and_write(out, new, force=True)
        for rel, text in placed.items():
            assert (out / rel).read_bytes() == text
        assert (out / "results.json").read_text(encoding="utf-8") == "new"
        assert not (out / "plots" / "figure-001.svg").exists()
        assert sorted(p.name for p in Path(tmp).iterdir()) == ["out"]


# --------------------------------------------------------------------------- lock and stale folders


def test_a_held_lock_stops_a_second_run(cli, no_compute, good_study, tmp_path):
    out = tmp_path / "out"
    lock = tmp_path / ".out.egressmargin-lock"
    fd = os.open(lock, os.O_RDWR | os.O_CREAT, 0o644)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        os.write(fd, b"4242")
        status, _, err = cli(["run", good_study, "--out", out, *RUN])
    finally:
        os.close(fd)
    assert status == 2
    assert "another egressmargin run (process 4242) is writing" in err and str(lock) in err
    assert not out.exists()


def _dead_pid() -> int:
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    return proc.pid


def test_folders_of_killed_runs_are_cleaned_live_ones_kept(cli, good_study, tmp_path):
    dead = tmp_path / f".out.egressmargin-tmp-{_dead_pid()}-abc_12"
    dead_aside = tmp_path / f".out.egressmargin-old-{_dead_pid()}-xyz"
    live = tmp_path / f".out.egressmargin-tmp-{os.getppid()}-def34"
    mine = tmp_path / ".out-my-notes"
    for d in (dead, dead_aside, live, mine):
        d.mkdir()
        (d / "results.json").write_text("{}", encoding="utf-8")
    status, _, err = cli(["run", good_study, "--out", tmp_path / "out", *RUN])
    assert status == 0, err
    assert not dead.exists() and not dead_aside.exists()
    assert live.exists() and mine.exists()


# --------------------------------------------------------------------------- signals (issue 13, item 3)

CHILD = textwrap.dedent("""\
    import sys, time, types
    from pathlib import Path
    from egressmargin import cli, pipeline
    marker, stage = Path(sys.argv[1]), sys.argv[2]

    def wait_here(*args, **kwargs):
        if stage == "report":
            (Path(args[2]) / "report.html").write_text("half", encoding="utf-8")
        marker.write_text("ready", encoding="utf-8")
        while True:
            time.sleep(0.05)

    if stage == "compute":
        pipeline.build_results = wait_here
    elif stage == "workers":           # inside the forked scenario workers
        pipeline.assess_scenario = wait_here
    else:
        sys.modules["egressmargin.report"] = types.SimpleNamespace(render_report=wait_here)
    sys.exit(cli.main(sys.argv[3:]))
    """)


def _interrupt(tmp_path: Path, study: Path, out: Path, stage: str, sig: int, *extra,
               meanwhile=None) -> subprocess.CompletedProcess:
    """Start a run that waits inside ``stage``, call ``meanwhile(pid)`` once it is there, then send
    ``sig``; return the finished process."""
    marker = tmp_path / "ready.marker"
    env = dict(os.environ, PYTHONPATH=str(REPO / "src") + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen([sys.executable, "-c", CHILD, str(marker), stage, "run", str(study), "--out", str(out),
                             "--samples", "20", *extra], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, env=env)
    try:
        for _ in range(2400):
            if marker.exists() or proc.poll() is not None:
                break
            try:
                proc.wait(timeout=0.05)
            except subprocess.TimeoutExpired:
                pass
        assert marker.exists(), f"child never reached the {stage} stage: {proc.communicate()}"
        if meanwhile is not None:
            meanwhile(proc.pid)
        proc.send_signal(sig)
        stdout, stderr = proc.communicate(timeout=120)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    marker.unlink()
    return subprocess.CompletedProcess(proc.args, proc.returncode, stdout, stderr)


def test_sigterm_while_computing_exits_143_cleanly(good_study, tmp_path):
    out = tmp_path / "out"
    done = _interrupt(tmp_path, good_study, out, "compute", signal.SIGTERM, "--no-pdf", "--quiet")
    assert done.returncode == 128 + signal.SIGTERM
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "SIGTERM" in lines[0] and "Traceback" not in done.stderr
    assert sorted(os.listdir(tmp_path)) == ["study"]          # no output, staging folder or lock


def test_a_second_run_while_the_first_computes_stops_with_exit_2(cli, good_study, tmp_path):
    """Issue 13 item 3: two runs on one folder. The second stops at once, naming the first's
    process; the first is not disturbed by it."""
    out, seen = tmp_path / "out", {}

    def second_run(pid):
        seen["pid"] = pid
        seen["status"], _, seen["err"] = cli(["run", good_study, "--out", out, *RUN])

    done = _interrupt(tmp_path, good_study, out, "compute", signal.SIGTERM, "--no-pdf", "--quiet",
                      meanwhile=second_run)
    assert seen["status"] == 2
    assert f"another egressmargin run (process {seen['pid']}) is writing" in seen["err"]
    assert done.returncode == 128 + signal.SIGTERM
    assert sorted(os.listdir(tmp_path)) == ["study"]


def test_sigterm_stops_the_scenario_workers_too(kit, make_study, tmp_path):
    """Scenarios in two worker processes that would never finish: SIGTERM to the main process
    alone still ends the run at once (the workers are stopped, not waited for)."""
    second = kit.study.split("scenarios:\n", 1)[1].split("egress:")[0].replace("id: fire-a", "id: fire-b")
    study = make_study(kit.study.replace("egress:", second + "egress:", 1))
    done = _interrupt(tmp_path, study, tmp_path / "out", "workers", signal.SIGTERM, "--no-pdf", "--quiet",
                      "--jobs", "2")
    assert done.returncode == 128 + signal.SIGTERM, done.stderr
    assert len(done.stderr.strip().splitlines()) == 1 and "Traceback" not in done.stderr
    assert sorted(os.listdir(tmp_path)) == ["study"]


def test_sigint_while_writing_the_report_exits_130_and_keeps_the_earlier_output(cli, good_study, tmp_path):
    out = tmp_path / "out"
    assert cli(["run", good_study, "--out", out, *RUN])[0] == 0
    before = tree(out)
    done = _interrupt(tmp_path, good_study, out, "report", signal.SIGINT, "--no-pdf", "--html", "--quiet")
    assert done.returncode == 128 + signal.SIGINT
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "SIGINT" in lines[0] and "Traceback" not in done.stderr
    assert tree(out) == before
    assert sorted(os.listdir(tmp_path)) == ["out", "study"]


# --------------------------------------------------------------------------- reproducible bytes, OS errors


def test_results_json_is_byte_identical_on_different_days(cli, good_study, tmp_path, monkeypatch):
    """Same study and seed, SOURCE_DATE_EPOCH one day apart: identical results.json; the manifest
    and the report carry the date (Reproducible Builds, SOURCE_DATE_EPOCH specification 1.1)."""
    seen = []

    def render_report(results, plots, folder, paper="A4", pdf=True, progress=None, generated=None):
        seen.append(generated)
        (Path(folder) / "report.html").write_text(f"generated {generated}", encoding="utf-8")

    module = types.ModuleType("egressmargin.report")
    module.render_report = render_report
    monkeypatch.setitem(sys.modules, "egressmargin.report", module)
    blobs = []
    for day, epoch in enumerate(("1700000000", "1700086400")):
        monkeypatch.setenv("SOURCE_DATE_EPOCH", epoch)
        out = tmp_path / f"day{day}"
        status, _, err = cli(["run", good_study, "--out", out, "--no-pdf", "--html", "--samples", "50", "--quiet"])
        assert status == 0, err
        blobs.append((out / "results.json").read_bytes())
    assert blobs[0] == blobs[1]
    assert "generated" not in json.loads(blobs[0])
    assert seen == ["2023-11-14T22:13:20Z", "2023-11-15T22:13:20Z"]


def test_malformed_source_date_epoch_is_an_input_error(cli, no_compute, good_study, tmp_path, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "yesterday")
    status, _, err = cli(["run", good_study, "--out", tmp_path / "out", *RUN])
    assert status == 2 and "SOURCE_DATE_EPOCH" in err and "'yesterday'" in err
    assert not (tmp_path / "out").exists()


@pytest.mark.parametrize("code, words", [(errno.ENOSPC, "Free some space"), (errno.EACCES, "Choose a folder")])
def test_disk_full_or_permission_while_writing_is_exit_2_with_the_path(cli, good_study, tmp_path, monkeypatch,
                                                                       code, words):
    def render_report(results, plots, folder, **keywords):
        raise OSError(code, os.strerror(code), str(Path(folder) / "report.pdf"))

    module = types.ModuleType("egressmargin.report")
    module.render_report = render_report
    monkeypatch.setitem(sys.modules, "egressmargin.report", module)
    status, _, err = cli(["run", good_study, "--out", tmp_path / "out", "--no-pdf", "--html", "--samples", "20"])
    assert status == 2, err
    assert "report.pdf" in err and os.strerror(code) in err and words in err
    assert sorted(os.listdir(tmp_path)) == ["study"]


def test_an_internal_os_error_keeps_its_traceback(good_study, tmp_path, monkeypatch):
    """An OS error that is not the user's situation is a bug: it propagates (exit 1 with a traceback)."""
    def render_report(results, plots, folder, **keywords):
        raise OSError(errno.EINVAL, "invalid argument (test)")

    module = types.ModuleType("egressmargin.report")
    module.render_report = render_report
    monkeypatch.setitem(sys.modules, "egressmargin.report", module)
    from egressmargin.cli import main
    with pytest.raises(OSError, match="invalid argument"):
        main(["run", str(good_study), "--out", str(tmp_path / "out"), "--no-pdf", "--html", "--samples", "20"])
    assert sorted(os.listdir(tmp_path)) == ["study"]


def test_a_mount_point_is_written_in_place(cli, good_study, tmp_path, monkeypatch):
    """A mount point (a container's volume) cannot be renamed: its staging folder and lock go
    inside it and the output is moved in; an earlier output there is replaced the same way."""
    out = tmp_path / "volume"
    out.mkdir()
    monkeypatch.setattr(outputs, "_is_mount", lambda p: Path(p) == out)
    renames = []
    real_rename = os.rename

    def rename(src, dst):
        assert Path(src) != out, "a mount point was renamed"
        renames.append(Path(dst))
        real_rename(src, dst)
    monkeypatch.setattr(outputs.os, "rename", rename)
    for seed in ("1", "2"):
        status, _, err = cli(["run", good_study, "--out", out, *RUN, "--seed", seed])
        assert status == 0, err
        assert sorted(os.listdir(out)) == [outputs.MANIFEST_NAME, "results.json"]
        assert json.loads((out / "results.json").read_text(encoding="utf-8"))["seed"] == int(seed)
    assert all(p.parent == out or out in p.parents for p in renames)
    (out / "notes.txt").write_text("mine", encoding="utf-8")
    status, _, err = cli(["run", good_study, "--out", out, *RUN, "--force"])
    assert status == 0, err
    assert sorted(os.listdir(out)) == [outputs.MANIFEST_NAME, "notes.txt", "results.json"]
    assert sorted(os.listdir(tmp_path)) == ["study", "volume"]


def test_output_folder_has_the_usual_permissions(tmp_path, monkeypatch):
    """The output folder is readable as the umask allows, not 0700 as a temporary folder is."""
    import stat

    from egressmargin.outputs import _usual_permissions

    folder = tmp_path / "x"
    folder.mkdir(mode=0o700)
    old = os.umask(0o022)
    try:
        _usual_permissions(folder)
    finally:
        os.umask(old)
    assert stat.S_IMODE(folder.stat().st_mode) == 0o755
