"""generate never loses the user's files, never leaves a mix of two projects, and reports a
write failure in one line (issue 15: items 1, 2, 9 and the write failures of item 7).

Interruptions are simulated at the operating system's door: every call that changes the file
system below the test's folder (os.rename, os.replace, os.mkdir, os.unlink, os.rmdir and
Path.write_text, which is how both the old and the new code write) is counted, and the k-th one
fails (an OSError) or "kills" the run (every later call fails too, so nothing more happens, as
after SIGKILL). Two subprocess tests use real signals.
"""

from __future__ import annotations

import contextlib
import errno
import fcntl
import functools
import json
import os
import pathlib
import shutil
import signal
import stat
import subprocess
import sys
import textwrap
import time
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import pytest

from benchgen import project
from benchgen.cli import main

ROOT = Path(__file__).resolve().parent.parent
WORK = ".benchgen-work"  # project.WORK_DIR; spelled out so the old code's run fails on behaviour
CONFIG_A = 'name = "core_a"\nfunction = "sincos"\nangle_width = 10\ndata_width = 10\n'
# Same core name, different contents: every file of A is replaced.
CONFIG_A2 = 'name = "core_a"\nfunction = "sincos"\nangle_width = 12\ndata_width = 12\n'
# Another core name: A's files must go, C's come in, the user's files stay.
CONFIG_C = 'name = "core_c"\nfunction = "sincos"\nangle_width = 12\ndata_width = 12\n'
USER_FILES = {
    "rtl/my_top.v": b"module my_top; endmodule\n",
    "bench/test_mine.py": b"def test_mine():\n    pass\n",
    "build/obj/Vcore.o": b"\x7fELF build product",
    "notes.txt": b"my notes\n",
}

Tree = dict[str, bytes | None]


class Killed(BaseException):
    """The simulated end of the process: not an Exception, so no handler of the code stops it."""


@pytest.fixture(scope="module", autouse=True)
def _render_once() -> Iterator[None]:
    """Size and render each config once per module: the tests repeat generates by the hundred,
    and compiling the templates dominates one generate."""
    render = project.render_project
    cache: dict[tuple[int, str], dict[str, str]] = {}

    def render_once(design: Any, config_text: str) -> dict[str, str]:
        key = (hash(design.spec), config_text)
        if key not in cache:
            cache[key] = render(design, config_text)
        return dict(cache[key])

    with pytest.MonkeyPatch.context() as m:
        m.setattr(project, "build_design", functools.cache(project.build_design))
        m.setattr(project, "render_project", render_once)
        yield


def tree(folder: Path) -> Tree:
    """Every file (bytes) and folder (None) below ``folder``, hidden ones included."""
    if not folder.exists():
        return {}
    return {
        p.relative_to(folder).as_posix(): (None if p.is_dir() and not p.is_symlink() else p.read_bytes())
        for p in sorted(folder.rglob("*"))
    }


def visible(t: Tree) -> Tree:
    """A tree without benchgen's work folder."""
    return {k: v for k, v in t.items() if k != WORK and not k.startswith(WORK + "/")}


def config(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / "configs" / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text)
    return path


def add_user_files(folder: Path) -> None:
    for rel, data in USER_FILES.items():
        (folder / rel).parent.mkdir(parents=True, exist_ok=True)
        (folder / rel).write_bytes(data)


def run_cli(capsys: pytest.CaptureFixture[str], *argv: str | Path) -> tuple[int, str]:
    """Run the command line in-process; return the exit status and what it wrote to stderr."""
    capsys.readouterr()
    status = main([str(a) for a in argv])
    return status, capsys.readouterr().err


def assert_one_line(err: str, *needles: str) -> None:
    assert "Traceback" not in err
    assert err.startswith("benchgen: error: ") and err.endswith("\n") and err.count("\n") == 1, err
    for needle in needles:
        assert needle in err, err


@pytest.fixture(scope="module")
def states(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Tree]:
    """Reference trees: fresh generations of A, C and A2; "old" is A with the user's files;
    "c" and "a2" are what generating C or A2 over it must give: the user's files, the new
    core's files, and none of A's generated files."""
    base = tmp_path_factory.mktemp("states")
    found: dict[str, Tree] = {}
    for name, text in (("a", CONFIG_A), ("c", CONFIG_C), ("a2", CONFIG_A2)):
        project.generate_project(config(base, f"{name}.toml", text), base / name)
        found[f"fresh_{name}"] = tree(base / name)
    add_user_files(base / "a")
    found["old"] = tree(base / "a")
    mine = {rel: data for rel, data in found["old"].items() if rel not in found["fresh_a"] or data is None}
    for name in ("c", "a2"):
        found[name] = {**mine, **found[f"fresh_{name}"]}
    return found


def make_old_project(tmp_path: Path, states: dict[str, Tree], name: str = "p") -> Path:
    out = tmp_path / name
    for rel, data in states["old"].items():
        if data is None:
            (out / rel).mkdir(parents=True, exist_ok=True)
        else:
            (out / rel).parent.mkdir(parents=True, exist_ok=True)
            (out / rel).write_bytes(data)
    return out


# ---------------------------------------------------------------- 1. never lose the user's files


def test_manifest_lists_every_file_generate_writes(tmp_path: Path) -> None:
    out = tmp_path / "p"
    project.generate_project(config(tmp_path, "a.toml", CONFIG_A), out)
    written = sorted(rel for rel, data in tree(out).items() if data is not None)
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["files"]["generated"] == written
    assert {"rtl/core_a_bulk.v", "bench/test_core_a_bulk.py", "manifest.json"} <= set(written)


@pytest.mark.parametrize(
    "manifest",
    [
        b"not json at all",
        b"\xff\xfe\x00binary",
        b"[1, 2]",
        b'"passed"',
        b'{"name": "mine", "files": ["a.v"]}',
        b'{"benchgen_version": "0.1.0", "toplevel": "../../victim", "files": {}}',
        b'{"benchgen_version": "0.1.0", "toplevel": "core_a", "files": {"generated": ["../victim.txt", "manifest.json"]}}',
        b'{"benchgen_version": "0.1.0", "toplevel": "core_a", "files": {"generated": ["/etc/passwd", "manifest.json"]}}',
        b'{"benchgen_version": "0.1.0", "toplevel": "core_a", "files": {"generated": "rtl"}}',
        b"[" * 100_000,
    ],
    ids=["text", "binary", "list", "string", "other-tool", "toplevel-escapes", "dotdot", "absolute", "not-a-list", "deep"],
)
def test_a_folder_with_a_foreign_manifest_is_refused_untouched(
    manifest: bytes, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "theirs"
    (out / "rtl").mkdir(parents=True)
    (out / "manifest.json").write_bytes(manifest)
    for rel in ("README.md", "run.py", "config.toml", "rtl/important.v"):
        (out / rel).write_text(f"the user's {rel}\n")
    (tmp_path / "victim.txt").write_text("outside the project\n")
    cfg = config(tmp_path, "a.toml", CONFIG_A)
    before = tree(tmp_path)
    status, err = run_cli(capsys, "generate", cfg, "-o", out)
    assert status == 2
    assert_one_line(err, str(out / "manifest.json"), "not written by benchgen", "-o")
    assert tree(tmp_path) == before


@pytest.mark.parametrize("new", ["c", "a2"])
def test_regenerate_replaces_only_the_files_it_wrote(
    new: str, tmp_path: Path, states: dict[str, Tree], capsys: pytest.CaptureFixture[str]
) -> None:
    out = make_old_project(tmp_path, states)
    cfg = config(tmp_path, f"{new}.toml", {"c": CONFIG_C, "a2": CONFIG_A2}[new])
    status, _ = run_cli(capsys, "generate", cfg, "-o", out)
    assert status == 0
    assert tree(out) == states[new]
    for rel, data in USER_FILES.items():
        assert (out / rel).read_bytes() == data


def test_regenerate_over_a_manifest_without_a_file_list(
    tmp_path: Path, states: dict[str, Tree], capsys: pytest.CaptureFixture[str]
) -> None:
    """Projects written before manifests listed their files own what that version wrote."""
    out = make_old_project(tmp_path, states)
    manifest = json.loads((out / "manifest.json").read_text())
    del manifest["files"]["generated"]
    (out / "manifest.json").write_text(json.dumps(manifest, indent=2, sort_keys=True) + "\n")
    # Those versions wrote no FuseSoC core file or C model either (they came with the file list).
    (out / "core_a.core").unlink()
    for rel in ("c/core_a.c", "c/core_a.h"):
        (out / rel).unlink()
    (out / "c").rmdir()
    status, _ = run_cli(capsys, "generate", config(tmp_path, "c.toml", CONFIG_C), "-o", out)
    assert status == 0
    assert tree(out) == states["c"]


def test_a_users_own_core_file_in_a_project_without_a_file_list_is_kept(
    tmp_path: Path, states: dict[str, Tree], capsys: pytest.CaptureFixture[str]
) -> None:
    """Before benchgen wrote NAME.core, a file of that name in a project was the user's own."""
    out = make_old_project(tmp_path, states)
    manifest = json.loads((out / "manifest.json").read_text())
    del manifest["files"]["generated"]
    (out / "manifest.json").write_text(json.dumps(manifest, indent=2, sort_keys=True) + "\n")
    (out / "core_a.core").write_text("CAPI=2:\nname: me:mine:core_a:1.0\n")
    for rel in ("c/core_a.c", "c/core_a.h"):  # those versions wrote no C model
        (out / rel).unlink()
    (out / "c").rmdir()
    before = tree(out)
    status, err = run_cli(capsys, "generate", config(tmp_path, "a.toml", CONFIG_A), "-o", out)
    assert status == 2
    assert_one_line(err, str(out / "core_a.core"), "not written by benchgen")
    assert tree(out) == before


def test_a_user_file_where_the_new_project_writes_is_refused(
    tmp_path: Path, states: dict[str, Tree], capsys: pytest.CaptureFixture[str]
) -> None:
    out = make_old_project(tmp_path, states)
    (out / "rtl" / "core_c.v").write_text("// the user's own core_c\n")
    before = tree(out)
    status, err = run_cli(capsys, "generate", config(tmp_path, "c.toml", CONFIG_C), "-o", out)
    assert status == 2
    assert_one_line(err, str(out / "rtl" / "core_c.v"), "not written by benchgen")
    assert tree(out) == before


# ------------------------------------------------------- 2. all or nothing, and recovery after a kill


class FileSteps:
    """Counts the calls that change the file system below ``root``; can fail or kill at one.

    Args:
        root: Only calls on paths below it count (and calls relative to a folder descriptor,
            which only shutil.rmtree makes here).
        at: The call (1-based) that fails; None counts only.
        kill: After the call at ``at``, every later call fails too (the process is gone).
    """

    def __init__(self, root: Path, at: int | None = None, *, kill: bool = False) -> None:
        self.root, self.at, self.kill, self.count = str(root), at, kill, 0

    def install(self, monkeypatch: pytest.MonkeyPatch) -> None:
        for name in ("rename", "replace", "mkdir", "unlink", "rmdir"):
            monkeypatch.setattr(os, name, self._wrap(getattr(os, name)))
        monkeypatch.setattr(pathlib.Path, "write_text", self._wrap(pathlib.Path.write_text))

    def _wrap(self, real: Callable[..., Any]) -> Callable[..., Any]:
        def step(*args: Any, **kwargs: Any) -> Any:
            paths = [os.fsdecode(a) for a in args[:2] if isinstance(a, (str, bytes, os.PathLike))]
            if "dir_fd" in kwargs or any(p.startswith(self.root) for p in paths):
                self.count += 1
                if self.at is not None and (self.count == self.at or (self.kill and self.count > self.at)):
                    if self.kill:
                        raise Killed(self.count)
                    raise OSError(errno.EIO, "Input/output error", paths[0] if paths else None)
            return real(*args, **kwargs)

        return step


def count_steps(
    tmp_path: Path, states: dict[str, Tree], cfg: Path, fresh: bool, monkeypatch: pytest.MonkeyPatch
) -> int:
    out = tmp_path / "count"
    if not fresh:
        out = make_old_project(tmp_path, states, "count")
    steps = FileSteps(tmp_path)
    with monkeypatch.context() as m:
        steps.install(m)
        project.generate_project(cfg, out)
    shutil.rmtree(out)
    return steps.count


@pytest.mark.parametrize("fresh", [False, True], ids=["regenerate", "fresh"])
def test_a_failure_at_any_file_step_leaves_the_old_or_the_new_project(
    fresh: bool,
    tmp_path: Path,
    states: dict[str, Tree],
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    cfg = config(tmp_path, "c.toml", CONFIG_C)
    old = {} if fresh else states["old"]
    new = states["fresh_c"] if fresh else states["c"]
    total = count_steps(tmp_path, states, cfg, fresh, monkeypatch)
    assert total > 20
    outcomes = set()
    for k in range(1, total + 1):
        out = tmp_path / f"p{k}"
        if not fresh:
            make_old_project(tmp_path, states, f"p{k}")
        with monkeypatch.context() as m:
            FileSteps(tmp_path, k).install(m)
            status, err = run_cli(capsys, "generate", cfg, "-o", out)
        got = visible(tree(out))
        if status == 2:
            assert_one_line(err, "Input/output error", str(out))
            assert got == old, f"a failure at step {k} of {total} changed the old project"
            assert not (out / WORK).exists()
            outcomes.add("old")
        else:
            # Only the clean-up after the new manifest is in may fail without harm.
            assert status == 0, err
            assert got == new, f"a failure at step {k} of {total} left a mix"
            outcomes.add("new")
        # The next run finds either state and completes it.
        status, err = run_cli(capsys, "generate", cfg, "-o", out)
        assert status == 0, err
        assert tree(out) == new
    assert outcomes == {"old", "new"}


@pytest.mark.parametrize("fresh", [False, True], ids=["regenerate", "fresh"])
def test_a_kill_at_any_file_step_is_finished_or_undone_by_the_next_run(
    fresh: bool,
    tmp_path: Path,
    states: dict[str, Tree],
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    cfg = config(tmp_path, "c.toml", CONFIG_C)
    old = {} if fresh else states["old"]
    new = states["fresh_c"] if fresh else states["c"]
    total = count_steps(tmp_path, states, cfg, fresh, monkeypatch)
    for k in range(1, total + 1):
        out = tmp_path / f"p{k}"
        if not fresh:
            make_old_project(tmp_path, states, out.name)
        with monkeypatch.context() as m:
            FileSteps(tmp_path, k, kill=True).install(m)
            with pytest.raises(Killed):
                main(["generate", str(cfg), "-o", str(out)])
        left = visible(tree(out))
        # What a killed run leaves: the old project, the new one, or a folder without a
        # manifest (recognisably unfinished) whose journal the next run uses.
        if left not in (old, new):
            assert "manifest.json" not in left, f"a kill at step {k} of {total} left a mix with a manifest"
        if out.exists():
            # The undo alone (what the next run does first) gives back exactly one whole project.
            undone = tmp_path / f"undo{k}"
            shutil.copytree(out, undone, symlinks=True)
            with project._folder_lock(undone):
                project._recover(undone)
            assert visible(tree(undone)) in (old, new) and not (undone / WORK).exists()
        status, err = run_cli(capsys, "generate", cfg, "-o", out)
        assert status == 0, err
        assert tree(out) == new, f"the run after a kill at step {k} of {total} did not recover"
    # Nothing is left beside the projects either (no hidden staging folders).
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == []


HOOKED = textwrap.dedent(
    """
    import os, signal, sys, time
    root, at, action = sys.argv[1], int(sys.argv[2]), sys.argv[3]
    real_rename, real_sleep, count = os.rename, time.sleep, 0

    def rename(src, dst, *args, **kwargs):
        global count
        if os.fsdecode(src).startswith(root):
            count += 1
            if count == at and action.startswith("SIG"):
                os.kill(os.getpid(), getattr(signal, action))
            elif count == at and action == "pause":
                open(os.path.join(root, "paused"), "w").close()
                while not os.path.exists(os.path.join(root, "go")):
                    real_sleep(0.01)
        return real_rename(src, dst, *args, **kwargs)

    def sleep(seconds):
        if action == "note-wait":
            open(os.path.join(root, "waiting"), "w").close()
        real_sleep(seconds)

    os.rename, time.sleep = rename, sleep
    from benchgen.cli import main
    sys.exit(main(sys.argv[4:]))
    """
)


def hooked(tmp_path: Path, at: int, action: str, *argv: str | Path) -> subprocess.Popen[str]:
    """benchgen in a subprocess that, at the ``at``-th rename below ``tmp_path``, sends itself a
    signal (``action`` = "SIGKILL", "SIGTERM") or pauses until ``tmp_path/go`` exists ("pause");
    "note-wait" marks ``tmp_path/waiting`` when it starts to wait for a lock."""
    env = {**os.environ, "PYTHONPATH": os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")])}
    return subprocess.Popen(
        [sys.executable, "-c", HOOKED, str(tmp_path), str(at), action, *map(str, argv)],
        env=env,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )


def finish(proc: subprocess.Popen[str]) -> tuple[int, str]:
    _, err = proc.communicate(timeout=120)
    return proc.returncode, err


def wait_for(path: Path, proc: subprocess.Popen[str]) -> None:
    """Wait until ``path`` exists (an event, not a time: the bound only stops a hung test)."""
    for _ in range(6000):
        if path.exists():
            return
        if proc.poll() is not None:
            pytest.fail(f"the process ended before {path.name}: {proc.communicate()}")
        time.sleep(0.01)
    pytest.fail(f"{path.name} never appeared")


def test_sigkill_in_mid_regenerate_is_recovered_by_the_next_run(
    tmp_path: Path, states: dict[str, Tree], capsys: pytest.CaptureFixture[str]
) -> None:
    cfg = config(tmp_path, "c.toml", CONFIG_C)
    for at in (5, 13):  # renames: 1 the journal, 2-9 the old files out, 10-17 the new ones in
        out = make_old_project(tmp_path, states, f"p{at}")
        status, err = finish(hooked(tmp_path, at, "SIGKILL", "generate", cfg, "-o", out))
        assert status == -signal.SIGKILL, err
        left = visible(tree(out))
        assert left in (states["old"], states["c"]) or "manifest.json" not in left
        status, err = run_cli(capsys, "generate", cfg, "-o", out)
        assert status == 0, err
        assert tree(out) == states["c"]
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".")] == []


def test_sigterm_waits_until_the_new_project_is_complete(tmp_path: Path, states: dict[str, Tree]) -> None:
    cfg = config(tmp_path, "c.toml", CONFIG_C)
    out = make_old_project(tmp_path, states)
    status, err = finish(hooked(tmp_path, 6, "SIGTERM", "generate", cfg, "-o", out))
    assert status == -signal.SIGTERM, err
    assert tree(out) == states["c"]


def test_a_work_folder_that_is_not_benchgens_is_left_alone(
    tmp_path: Path, states: dict[str, Tree], capsys: pytest.CaptureFixture[str]
) -> None:
    out = make_old_project(tmp_path, states)
    (out / WORK).mkdir()
    (out / WORK / "mine.txt").write_text("not benchgen's\n")
    before = tree(out)
    status, err = run_cli(capsys, "generate", config(tmp_path, "c.toml", CONFIG_C), "-o", out)
    assert status == 2
    assert_one_line(err, str(out / WORK), "move it away")
    assert tree(out) == before


def test_a_damaged_journal_is_one_line_and_touches_nothing(
    tmp_path: Path, states: dict[str, Tree], capsys: pytest.CaptureFixture[str]
) -> None:
    out = make_old_project(tmp_path, states)
    (out / WORK).mkdir()
    (out / WORK / "BENCHGEN-WORK-FOLDER").write_text("benchgen's\n")
    (out / WORK / "journal.json").write_text('{"backup": ["../../elsewhere"], "install": [], "new_dirs": []}')
    before = tree(tmp_path)
    status, err = run_cli(capsys, "generate", config(tmp_path, "c.toml", CONFIG_C), "-o", out)
    assert status == 2
    assert_one_line(err, "journal", "damaged", str(out / WORK / "old"))
    assert {k: v for k, v in tree(tmp_path).items() if not k.startswith("configs")} == before


# ------------------------------------------------------------- 7. write failures: one line, exit 2


@contextlib.contextmanager
def read_only(folder: Path) -> Iterator[None]:
    """Make ``folder`` unwritable: its mode for a user; for root, who ignores modes, the
    immutable attribute (chattr +i), under which nobody can add, rename or remove its entries."""
    if os.geteuid() != 0:
        mode = folder.stat().st_mode
        folder.chmod(mode & ~0o222)
        try:
            yield
        finally:
            folder.chmod(mode)
        return
    chattr = shutil.which("chattr")
    if chattr is None or subprocess.run([chattr, "+i", str(folder)], capture_output=True).returncode:
        pytest.skip("running as root on a file system without the immutable attribute (chattr +i)")
    try:
        yield
    finally:
        subprocess.run([chattr, "-i", str(folder)], check=True)


def test_a_read_only_project_folder_is_one_line_and_changes_nothing(
    tmp_path: Path, states: dict[str, Tree], capsys: pytest.CaptureFixture[str]
) -> None:
    out = make_old_project(tmp_path, states)
    cfg = config(tmp_path, "c.toml", CONFIG_C)
    before = tree(tmp_path)
    with read_only(out):
        status, err = run_cli(capsys, "generate", cfg, "-o", out)
    assert status == 2
    assert_one_line(err, f"make '{out}' writable")
    assert tree(tmp_path) == before


def test_a_read_only_rtl_folder_is_one_line_and_keeps_the_old_project(
    tmp_path: Path, states: dict[str, Tree], capsys: pytest.CaptureFixture[str]
) -> None:
    out = make_old_project(tmp_path, states)
    cfg = config(tmp_path, "c.toml", CONFIG_C)
    before = tree(tmp_path)
    with read_only(out / "rtl"):
        status, err = run_cli(capsys, "generate", cfg, "-o", out)
    assert status == 2
    assert_one_line(err, str(out / "rtl" / "core_a.v"), "project is unchanged", f"make '{out / 'rtl'}' writable")
    assert tree(tmp_path) == before
    status, err = run_cli(capsys, "generate", cfg, "-o", out)  # the fix the message gives works
    assert status == 0 and tree(out) == states["c"], err


def test_a_folder_that_cannot_be_created_is_one_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    parent = tmp_path / "shared"
    parent.mkdir()
    with read_only(parent):
        status, err = run_cli(capsys, "generate", config(tmp_path, "a.toml", CONFIG_A), "-o", parent / "p")
    assert status == 2
    assert_one_line(err, str(parent / "p"), f"make '{parent}' writable")
    assert list(parent.iterdir()) == []


@pytest.mark.parametrize("fresh", [False, True], ids=["regenerate", "fresh"])
def test_a_full_disk_is_one_line_and_keeps_the_old_project(
    fresh: bool,
    tmp_path: Path,
    states: dict[str, Tree],
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    out = tmp_path / "p" if fresh else make_old_project(tmp_path, states)
    cfg = config(tmp_path, "c.toml", CONFIG_C)
    before = tree(tmp_path)
    write_text = pathlib.Path.write_text

    def full(self: Path, *args: Any, **kwargs: Any) -> int:
        if self.name == "core_c.v":  # the largest file: the disk fills while it is written
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return write_text(self, *args, **kwargs)

    monkeypatch.setattr(pathlib.Path, "write_text", full)
    status, err = run_cli(capsys, "generate", cfg, "-o", out)
    assert status == 2
    assert_one_line(err, "No space left on device", str(out), "free space")
    assert tree(tmp_path) == before


def test_an_output_below_a_file_is_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    (tmp_path / "somefile").write_text("a file\n")
    cfg = config(tmp_path, "a.toml", CONFIG_A)
    before = tree(tmp_path)
    status, err = run_cli(capsys, "generate", cfg, "-o", tmp_path / "somefile" / "proj")
    assert status == 2
    assert_one_line(err, str(tmp_path / "somefile"), "is a file", "-o")
    assert tree(tmp_path) == before


def test_an_output_path_that_is_a_file_is_one_line(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    (tmp_path / "somefile").write_text("a file\n")
    cfg = config(tmp_path, "a.toml", CONFIG_A)
    before = tree(tmp_path)
    status, err = run_cli(capsys, "generate", cfg, "-o", tmp_path / "somefile")
    assert status == 2
    assert_one_line(err, str(tmp_path / "somefile"), "is a file", "-o")
    assert tree(tmp_path) == before


# ------------------------------------------------------------------------ 9. the umask decides


@pytest.mark.parametrize("umask, folder_mode, file_mode", [(0o022, 0o755, 0o644), (0o077, 0o700, 0o600)])
def test_project_folders_get_the_mode_the_umask_gives(
    umask: int, folder_mode: int, file_mode: int, tmp_path: Path
) -> None:
    out = tmp_path / "new" / "p"
    previous = os.umask(umask)
    try:
        project.generate_project(config(tmp_path, "a.toml", CONFIG_A), out)
    finally:
        os.umask(previous)
    modes = {rel: stat.S_IMODE((out / rel).stat().st_mode) for rel in ["", *tree(out)]}
    folders = {rel for rel, data in {"": None, **tree(out)}.items() if data is None}
    assert {rel: m for rel, m in modes.items() if rel in folders} == dict.fromkeys(folders, folder_mode)
    assert {rel: m for rel, m in modes.items() if rel not in folders} == {
        rel: file_mode for rel in modes if rel not in folders
    }
    assert folders == {"", "rtl", "bench", "c"}


# ------------------------------------------------------------- 5. one generate at a time per folder


def test_a_generate_into_a_busy_folder_is_refused_in_one_line(
    tmp_path: Path, states: dict[str, Tree], monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]
) -> None:
    out = make_old_project(tmp_path, states)
    before = tree(out)
    monkeypatch.setattr(project, "LOCK_WAIT_SECONDS", 0.0, raising=False)
    holder = os.open(out, os.O_RDONLY)
    try:
        fcntl.flock(holder, fcntl.LOCK_EX)  # as a running generate holds it
        status, err = run_cli(capsys, "generate", config(tmp_path, "c.toml", CONFIG_C), "-o", out)
    finally:
        os.close(holder)
    assert status == 2
    assert_one_line(err, "another benchgen is generating into", str(out))
    assert tree(out) == before


def test_a_second_generate_waits_for_the_first_and_both_complete(
    tmp_path: Path, states: dict[str, Tree], capsys: pytest.CaptureFixture[str]
) -> None:
    out = make_old_project(tmp_path, states)
    cfg_c, cfg_a2 = config(tmp_path, "c.toml", CONFIG_C), config(tmp_path, "a2.toml", CONFIG_A2)
    first = hooked(tmp_path, 4, "pause", "generate", cfg_c, "-o", out)  # stops half-way through
    wait_for(tmp_path / "paused", first)
    second = hooked(tmp_path, 0, "note-wait", "generate", cfg_a2, "-o", out)
    wait_for(tmp_path / "waiting", second)  # it waits for the lock instead of writing
    (tmp_path / "go").touch()
    assert finish(first)[0] == 0
    assert finish(second)[0] == 0
    # Exactly what C then A2 one after the other give.
    serial = make_old_project(tmp_path, states, "serial")
    for cfg in (cfg_c, cfg_a2):
        assert run_cli(capsys, "generate", cfg, "-o", serial)[0] == 0
    assert tree(out) == tree(serial)
