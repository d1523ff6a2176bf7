"""Saving a project without losing anyone's work: changes made on disk by another window or program,
read-only files, hard links, a full disk, and temporary files left by interrupted saves."""

import errno
import hashlib
import os
import subprocess
import sys
import time
from pathlib import Path

import pytest

from orbitdesk.document import safe_files
from orbitdesk.document.project import (
    UNCHECKED, Project, ProjectConflict, ProjectError, ProjectReadOnly, check_unchanged, disk_state, load,
    load_with_state, remove_stale_temps, save,
)


def temps(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".tmp"))


# ---------------------------------------------------------------- changed on disk (two writers)

def test_save_refuses_when_another_writer_changed_the_file(tmp_path):
    f = tmp_path / "p.orbitdesk"
    save(f, Project(name="first"))
    mine, state = load_with_state(f)
    save(f, Project(name="from the other window"))  # a second writer that does not check
    before = f.read_bytes()
    with pytest.raises(ProjectConflict, match="changed on disk since it was opened") as info:
        save(f, Project(name="mine"), expected=state)
    assert f.read_bytes() == before  # nothing overwritten
    assert info.value.expected == state and info.value.current == disk_state(f)
    with pytest.raises(ProjectConflict):
        check_unchanged(f, state)
    # The user chose to overwrite: the check is skipped on request, and the new state chains on.
    new_state = save(f, Project(name="mine"), expected=UNCHECKED)
    assert load(f).name == "mine" and load(str(f) + ".bak").name == "from the other window"
    assert new_state == disk_state(f)
    check_unchanged(f, new_state)
    assert save(f, Project(name="mine again"), expected=new_state) == disk_state(f)


def test_same_content_rewritten_or_touched_is_not_a_conflict(tmp_path):
    f = tmp_path / "p.orbitdesk"
    state = save(f, Project(name="one"))
    os.utime(f, ns=(state.mtime_ns + 5 * 10**9, state.mtime_ns + 5 * 10**9))  # e.g. a backup tool's touch
    assert disk_state(f).mtime_ns != state.mtime_ns
    save(f, Project(name="two"), expected=state)
    assert load(f).name == "two"


def test_file_removed_or_created_meanwhile_is_a_conflict(tmp_path):
    f = tmp_path / "p.orbitdesk"
    state = save(f, Project(name="one"))
    f.unlink()
    with pytest.raises(ProjectConflict, match="removed or renamed"):
        save(f, Project(name="two"), expected=state)
    assert not f.exists()
    save(tmp_path / "q.orbitdesk", Project(name="someone else's"))
    with pytest.raises(ProjectConflict, match="created by someone else"):
        save(tmp_path / "q.orbitdesk", Project(name="mine"), expected=None)  # "Save As" chose a new name
    assert load(tmp_path / "q.orbitdesk").name == "someone else's"


# ---------------------------------------------------------------- read-only files and hard links

def test_read_only_file_is_refused_unless_confirmed_and_keeps_its_mode(tmp_path):
    f = tmp_path / "p.orbitdesk"
    save(f, Project(name="published"))
    os.chmod(f, 0o444)
    before = f.read_bytes()
    with pytest.raises(ProjectReadOnly, match="read-only"):
        save(f, Project(name="edited"))
    assert f.read_bytes() == before and temps(tmp_path) == []
    save(f, Project(name="edited"), overwrite_read_only=True)
    assert load(f).name == "edited" and load(str(f) + ".bak").name == "published"
    assert (f.stat().st_mode & 0o777) == 0o444


def test_hard_linked_file_stays_linked_and_gets_a_backup(tmp_path):
    f = tmp_path / "p.orbitdesk"
    other = tmp_path / "shared" / "same.orbitdesk"
    other.parent.mkdir()
    save(f, Project(name="short"))
    os.link(f, other)
    inode = f.stat().st_ino
    save(f, Project(name="a much longer name than before", notes="n" * 5000))
    assert f.stat().st_ino == inode and f.stat().st_nlink == 2
    assert load(other).name == "a much longer name than before"
    assert load(str(f) + ".bak").name == "short"
    save(f, Project(name="short again"))  # shrinking in place leaves no old tail behind
    assert load(other).name == "short again" and other.read_bytes() == f.read_bytes()
    assert temps(tmp_path) == []


def test_hard_linked_file_on_a_full_disk_is_left_intact(tmp_path, monkeypatch):
    if not hasattr(os, "posix_fallocate"):
        pytest.skip("no posix_fallocate on this system")
    f = tmp_path / "p.orbitdesk"
    save(f, Project(name="old"))
    os.link(f, tmp_path / "link.orbitdesk")
    before = f.read_bytes()

    def full(fd, offset, length):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(os, "posix_fallocate", full)
    with pytest.raises(ProjectError, match="could not save .*No space left"):
        save(f, Project(name="new", notes="x" * 10000))
    assert f.read_bytes() == before


def test_full_disk_during_an_ordinary_save_keeps_the_old_file(tmp_path, monkeypatch):
    f = tmp_path / "p.orbitdesk"
    save(f, Project(name="old"))
    before = f.read_bytes()
    real_fdopen = os.fdopen

    class FullFile:
        def __init__(self, fd, *args, **kwargs):
            self._f = real_fdopen(fd, *args, **kwargs)

        def write(self, data):
            raise OSError(errno.ENOSPC, "No space left on device")

        def __getattr__(self, name):
            return getattr(self._f, name)

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            self._f.close()

    monkeypatch.setattr(os, "fdopen", FullFile)
    with pytest.raises(ProjectError, match="No space left"):
        save(f, Project(name="new"))
    assert f.read_bytes() == before and temps(tmp_path) == []


# ---------------------------------------------------------------- temporary files of interrupted saves

def dead_pid() -> int:
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    return proc.pid


def test_stale_temporary_files_are_removed_on_save_and_on_request(tmp_path):
    f = tmp_path / "p.orbitdesk"
    save(f, Project(name="one"))
    host, gone = safe_files.HOST_TAG, dead_pid()
    stale = [f".p.orbitdesk.{host}-{gone}-0123456789ab.tmp",          # killed save on this machine
             f".p.orbitdesk.bak.{host}-{gone}-0123456789ac.tmp",      # ... while writing the backup
             ".p.orbitdesk.0123456789ad.tmp"]                          # older naming, hours old
    kept = [f".p.orbitdesk.{host}-{os.getppid()}-0123456789ae.tmp",     # owner still running
            ".p.orbitdesk.0123456789af.tmp",                           # older naming, just written
            f".p.orbitdesk.{'f' * 8}-{gone}-0123456789b0.tmp",         # another machine: judged by age only
            f".q.orbitdesk.{host}-{gone}-0123456789b1.tmp",            # another project's
            f".p.orbitdesk.{host}-{gone}-nothex.tmp", "p.orbitdesk.tmp"]  # not our pattern
    for name in stale + kept:
        (tmp_path / name).write_bytes(b"x" * 1000)
    hours_ago = time.time() - 3 * 3600
    os.utime(tmp_path / stale[2], (hours_ago, hours_ago))
    save(f, Project(name="two"))
    assert temps(tmp_path) == sorted(n for n in kept if n.endswith(".tmp"))
    assert (tmp_path / "p.orbitdesk.tmp").exists()
    # Owned by a dead process now, or grown old: removed when the project is next opened.
    os.rename(tmp_path / kept[0], tmp_path / f".p.orbitdesk.{host}-{gone}-0123456789ae.tmp")
    os.utime(tmp_path / kept[2], (hours_ago, hours_ago))
    assert len(remove_stale_temps(f)) == 2
    assert temps(tmp_path) == sorted(kept[1:2] + kept[3:])


def test_temporary_file_names_carry_host_and_pid(tmp_path):
    name = os.path.basename(safe_files.temp_name(str(tmp_path / "p.orbitdesk")))
    assert name.startswith(f".p.orbitdesk.{safe_files.HOST_TAG}-{os.getpid()}-") and name.endswith(".tmp")
    assert safe_files.pid_alive(os.getpid()) and not safe_files.pid_alive(dead_pid())


# ---------------------------------------------------------------- property: no change on disk is ever lost

from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

# A deep fuzz run (ORBITDESK_FUZZ_EXAMPLES, as in test_fuzz_parser.py) also runs these; the one that
# writes files takes a hundredth of the examples.
_DEEP = int(os.environ.get("ORBITDESK_FUZZ_EXAMPLES", "0"))

_OTHER = st.sampled_from(["write", "same content", "touch", "delete", "read-only", "writable", "nothing"])


@settings(max_examples=max(60, _DEEP // 100), deadline=None, derandomize=not _DEEP,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(steps=st.lists(st.tuples(_OTHER, st.booleans()), min_size=1, max_size=8))
def test_guarded_saves_never_lose_another_writers_change(tmp_path_factory, steps):
    """Another writer acts between our saves; a guarded save succeeds exactly when the content is still
    what we last read or wrote, and whenever it refuses, the file is byte-for-byte what the other left."""
    f = tmp_path_factory.mktemp("guarded") / "p.orbitdesk"
    state = save(f, Project(name="ours 0"))
    for i, (other, confirm_read_only) in enumerate(steps):
        if other == "write":
            if f.exists():
                os.chmod(f, 0o644)
            save(f, Project(name=f"theirs {i}"))
        elif other == "same content" and f.exists():
            os.chmod(f, 0o644)
            f.write_bytes(f.read_bytes())
        elif other == "touch" and f.exists():
            os.utime(f, ns=(10**18 + i, 10**18 + i))
        elif other == "delete" and f.exists():
            f.unlink()
        elif other in ("read-only", "writable") and f.exists():
            os.chmod(f, 0o444 if other == "read-only" else 0o644)
        before = f.read_bytes() if f.exists() else None
        if state is None:
            unchanged = before is None
        else:
            unchanged = before is not None and hashlib.sha256(before).hexdigest() == state.digest
        read_only = f.exists() and not f.stat().st_mode & 0o222
        try:
            state = save(f, Project(name=f"ours {i + 1}"), expected=state, overwrite_read_only=confirm_read_only)
        except ProjectConflict:
            assert not unchanged
            assert (f.read_bytes() if f.exists() else None) == before
            state = load_with_state(f)[1] if f.exists() else None  # the user reloads what is there
            continue
        except ProjectReadOnly:
            assert unchanged and read_only and not confirm_read_only
            assert f.read_bytes() == before
            continue
        assert unchanged and load(f).name == f"ours {i + 1}"


@pytest.mark.parametrize("stem", ["π" * 120, "日本語の長いプロジェクト名" * 9, "a+b (1) [x]*.?^$|{2}", "ü" * 40 + "\u0301"])
def test_long_and_unusual_file_names_save_and_clean_up(tmp_path, stem):
    """Hostile names: many multi-byte characters (the temporary name must stay within 255 bytes),
    regular-expression metacharacters, combining marks."""
    name = (stem.encode()[:240].decode("utf-8", "ignore")) + ".orbitdesk"
    f = tmp_path / name
    save(f, Project(name="one"))
    save(f, Project(name="two"))
    assert load(f).name == "two" and load(str(f) + ".bak").name == "one"
    leftover = Path(safe_files.temp_name(str(f)).replace(f"-{os.getpid()}-", f"-{dead_pid()}-"))
    leftover.write_bytes(b"partial")
    assert len(os.fsencode(leftover.name)) <= 255
    assert remove_stale_temps(f) == [str(leftover)]
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([name, name + ".bak"])


def test_disk_state_round_trips_through_json_and_refuses_anything_else(tmp_path):
    state = save(tmp_path / "p.orbitdesk", Project(name="one"))
    assert safe_files.DiskState.from_json(state.to_json()) == state
    good = state.to_json()
    for bad in [None, [], "x", {**good, "size": -1}, {**good, "size": True}, {**good, "mtime_ns": 1.5},
                {**good, "sha256": "g" * 64}, {**good, "sha256": state.digest + "\n"}, {"size": 1}]:
        assert safe_files.DiskState.from_json(bad) is None, bad


_file_names = st.text(st.characters(blacklist_categories=("Cs",), blacklist_characters="/\x00"),
                      min_size=1, max_size=120).filter(lambda n: n not in (".", "..") and len(n.encode()) <= 250)


@settings(max_examples=_DEEP or 400, deadline=None, derandomize=not _DEEP)
@given(name=_file_names)
def test_temporary_names_fit_and_are_recognised_for_any_file_name(name):
    """Any file name: the temporary name stays within 255 bytes, is recognised as ours for that file, and
    neither the file, its backup nor another file's temporary is taken for one."""
    target = os.path.join("/somewhere", name)
    tmp = os.path.basename(safe_files.temp_name(target))
    assert len(os.fsencode(tmp)) <= 255
    mine = safe_files._temp_pattern(name)
    assert mine.fullmatch(tmp)
    assert not mine.fullmatch(name) and not mine.fullmatch(name + ".bak") and not mine.fullmatch("." + name)
    other = os.path.basename(safe_files.temp_name(os.path.join("/somewhere", "x" + name)))
    assert not mine.fullmatch(other) or os.fsencode("x" + name)[:100] == os.fsencode(name)[:100]


_json = st.recursive(st.none() | st.booleans() | st.integers() | st.floats() | st.text(max_size=70),
                     lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=8), inner,
                                                                                 max_size=4), max_leaves=10)


@settings(max_examples=_DEEP or 400, deadline=None, derandomize=not _DEEP)
@given(value=_json | st.fixed_dictionaries({"mtime_ns": _json, "size": _json, "sha256": _json}))
def test_disk_state_from_any_json_never_raises(value):
    state = safe_files.DiskState.from_json(value)
    assert state is None or safe_files.DiskState.from_json(state.to_json()) == state
