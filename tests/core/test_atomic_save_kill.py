"""Kill a process with SIGKILL while it saves a project; the file on disk must always be complete.

A process saves a few documents to the same path and kills itself (SIGKILL, the signal nothing can
catch) at a chosen stage of one file write inside ``save``: before the temporary file is created, half
way through writing it, after its fsync, after the rename, after the folder fsync -- of the backup copy
or of the project file itself. The stages are reached through the process's own calls (it watches its
``os`` calls in ``safe_files``), so where each kill lands does not depend on how fast the machine is.
The kill points come from a fixed seed (printed; ORBITDESK_KILL_SEED overrides it); the first ten cover
every stage of both files. The test keeps its own account of what each file must hold and checks after
every kill that the project file and its backup are exactly those documents, and that the only temporary
file left is the killed write's own (half written, or complete after its fsync), which the next save
removes. The saving processes write nothing into the source tree (-I -B).
"""

import json
import os
import random
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from orbitdesk.document.project import ParameterSetting, Project, ProjectError, WalkthroughStep, dumps, load, save

KILLS = 200
SEED = int(os.environ.get("ORBITDESK_KILL_SEED", "20261202"))
STAGES = ["open", "write", "fsync", "replace", "dirsync"]  # the order of one atomic file write
REPO = Path(__file__).resolve().parents[2]

# The child runs with -I (isolated: no user site, no environment paths) and -B (no __pycache__ written
# into the source tree); the repository root is put on sys.path explicitly. It imports the project code
# once, then for every line on its input forks a process that does the saves and is killed, and answers
# with the signal that ended it and the stages it reached (forking keeps 200 kills fast).
CHILD = r"""
import json, os, sys
sys.path.insert(0, sys.argv[1])
from orbitdesk.document import project as pj
from orbitdesk.document import safe_files
target, sources = sys.argv[2], sys.argv[3:5]
docs = {key: pj.loads(open(path, encoding="utf-8").read()) for key, path in zip("AB", sources)}
real_os = os


def saver(plan, kill_file, kill_stage, log):
    armed = False
    fds = {}  # temporary file descriptor -> the file it will replace
    last = ["main"]

    def reach(file, stage):
        real_os.write(log, f"{file} {stage}\n".encode())
        if armed and (file, stage) == (kill_file, kill_stage):
            real_os.kill(real_os.getpid(), 9)

    def which(tmp):  # ".kill.orbitdesk.bak.HOST-PID-RANDOM.tmp": "bak"; ".kill.orbitdesk.HOST-...": "main"
        return "bak" if real_os.path.basename(tmp).startswith("." + real_os.path.basename(target) + ".bak.") else "main"

    class HalfWay:
        def __init__(self, f, file):
            self.f, self.file = f, file
        def __enter__(self):
            return self
        def __exit__(self, *exc):
            return self.f.__exit__(*exc)
        def write(self, data):
            half = len(data) // 2
            self.f.write(data[:half]); self.f.flush(); real_os.fsync(self.f.fileno())
            reach(self.file, "write")
            return self.f.write(data[half:])
        def __getattr__(self, name):
            return getattr(self.f, name)

    class WatchedOs:
        def __getattr__(self, name):
            return getattr(real_os, name)
        def open(self, path, flags, *args):
            if flags & real_os.O_CREAT:
                reach(which(path), "open")
                fd = real_os.open(path, flags, *args)
                fds[fd] = which(path)
                return fd
            return real_os.open(path, flags, *args)
        def fdopen(self, fd, *args, **kw):
            f = real_os.fdopen(fd, *args, **kw)
            return HalfWay(f, fds[fd]) if fd in fds else f
        def fsync(self, fd):
            real_os.fsync(fd)
            if fd in fds:
                reach(fds.pop(fd), "fsync")
            else:
                reach(last[0], "dirsync")
        def replace(self, src, dst):
            real_os.replace(src, dst)
            last[0] = which(src)
            reach(last[0], "replace")

    safe_files.os = WatchedOs()
    for i, key in enumerate(plan):
        armed = i == len(plan) - 1
        pj.save(target, docs[key])
    real_os.write(log, b"finished\n")


print("ready", flush=True)
for line in sys.stdin:
    plan, kill_file, kill_stage = line.split()
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:
        os.close(r)
        try:
            saver(plan, kill_file, kill_stage, w)
        finally:
            os._exit(3)
    os.close(w)
    with os.fdopen(r, encoding="utf-8") as f:
        log = f.read().splitlines()
    _, status = os.waitpid(pid, 0)
    print(json.dumps({"signal": os.WTERMSIG(status) if os.WIFSIGNALED(status) else None, "pid": pid,
                      "log": log[-3:]}), flush=True)
"""


def make_doc(marker: str, bulk_chars: int, seed: int) -> Project:
    rng = random.Random(seed)
    words = [f"w{rng.randrange(10**6)}" for _ in range(bulk_chars // 8)]
    return Project(
        name=f"doc {marker}",
        model=f"x' = -{marker.lower()}*x\n" + "# " + " ".join(words)[:bulk_chars] + "\n",
        parameters={marker.lower(): ParameterSetting(1.5, 0.0, 3.0)},
        initial={"x": 1.0},
        views={"phase": {"marker": marker, "points": [[i, i * 0.5] for i in range(500)]}},
        walkthrough=[WalkthroughStep(f"step {marker}", "note", {"marker": marker})],
        notes=marker * 1000,
    )


def expected_after(state: dict, plan: str, kill_file: str, kill_stage: str) -> dict:
    """What the project file ("main") and backup ("bak") hold after the saves of ``plan``, the last one
    killed at ``kill_stage`` of its write of ``kill_file`` (None: no such file). A file changes at its
    rename, the backup (the previous document) is written first when there is a previous document."""
    state = dict(state)
    for i, key in enumerate(plan):
        writes = ([("bak", state["main"])] if state["main"] is not None else []) + [("main", key)]
        for file, content in writes:
            if i == len(plan) - 1 and file == kill_file:
                if STAGES.index(kill_stage) >= STAGES.index("replace"):
                    state[file] = content
                return state
            state[file] = content
    raise AssertionError(f"the kill point {kill_file} {kill_stage} is never reached by {plan}")


ALL_POINTS = [(f, s) for f in ("main", "bak") for s in STAGES]


@pytest.mark.slow
def test_sigkill_during_save_never_leaves_a_partial_document(tmp_path):
    rng = random.Random(SEED)
    docs = {"A": make_doc("A", 20_000, 1), "B": make_doc("B", 30_000, 2)}
    sources = []
    for key, doc in docs.items():
        src = tmp_path / f"{key}.json"
        src.write_text(dumps(doc), encoding="utf-8")
        sources.append(str(src))
    work = tmp_path / "work"
    work.mkdir()
    target = work / "kill.orbitdesk"
    backup = Path(str(target) + ".bak")
    env = dict(os.environ, PYTHONDONTWRITEBYTECODE="1")

    landed = {}
    child = subprocess.Popen([sys.executable, "-I", "-B", "-c", CHILD, str(REPO), str(target), *sources],
                             stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                             env=env)
    try:
        assert child.stdout.readline() == "ready\n", child.stderr.read()
        run_kills(child, rng, docs, target, backup, landed)
    finally:
        child.stdin.close()
        child.wait(60)
        child.stdout.close()
        child.stderr.close()
    assert child.returncode == 0

    print(f"\nkill test: seed={SEED} kills={KILLS} by stage: "
          + ", ".join(f"{f} {s}={n}" for (f, s), n in sorted(landed.items())))
    assert set(landed) == set(ALL_POINTS)
    save(target, docs["A"])  # the next save cleans up what the last killed save left
    assert sorted(p.name for p in work.iterdir()) == sorted([target.name, backup.name])
    assert load(target) == docs["A"]


def run_kills(child, rng, docs, target, backup, landed):
    work = target.parent
    state = {"main": None, "bak": None}
    for k in range(KILLS):
        # The first kills go through every stage of both files in order, then they are drawn from the seed.
        kill_file, kill_stage = ALL_POINTS[k] if k < len(ALL_POINTS) else rng.choice(ALL_POINTS)
        # Zero to two completed saves, then the killed one; a backup write needs a document on disk first.
        plan = "".join(rng.choice("AB") for _ in range(rng.randrange(1, 4)))
        if kill_file == "bak" and state["main"] is None and len(plan) == 1:
            plan = rng.choice("AB") + plan
        ctx = f"seed={SEED} kill #{k} plan={plan} at {kill_file} {kill_stage}"
        want = expected_after(state, plan, kill_file, kill_stage)

        child.stdin.write(f"{plan} {kill_file} {kill_stage}\n")
        child.stdin.flush()
        reply = child.stdout.readline()
        assert reply, f"{ctx}: the child stopped: {child.stderr.read() if child.poll() is not None else ''}"
        reply = json.loads(reply)
        assert reply["signal"] == signal.SIGKILL, f"{ctx}: the saving process was not killed: {reply}"
        assert reply["log"][-1] == f"{kill_file} {kill_stage}", f"{ctx}: {reply}"
        landed[(kill_file, kill_stage)] = landed.get((kill_file, kill_stage), 0) + 1

        try:
            on_disk = {"main": load(target) if target.exists() else None,
                       "bak": load(backup) if backup.exists() else None}
        except ProjectError as e:
            raise AssertionError(f"{ctx}: a partial document was left on disk: {e}") from None
        for file in ("main", "bak"):
            expect = docs[want[file]] if want[file] is not None else None
            assert on_disk[file] == expect, \
                f"{ctx}: {file} holds {on_disk[file] and on_disk[file].name}, expected {want[file]}"
        # The previous kill's temporary file was removed by this save; this kill's is there only when the
        # write was killed between creating and renaming it: half written, or complete after its fsync.
        temps = sorted(p for p in work.iterdir() if p not in (target, backup))
        if kill_stage in ("write", "fsync"):
            assert len(temps) == 1 and temps[0].name.startswith(f".{target.name}.") \
                and temps[0].name.endswith(".tmp") and f"-{reply['pid']}-" in temps[0].name, f"{ctx}: {temps}"
            writing = docs[plan[-1]] if kill_file == "main" else docs[want["main"]]
            if kill_stage == "write":
                assert 0 < temps[0].stat().st_size < len(dumps(writing).encode("utf-8")), ctx
            else:
                assert load(temps[0]) == writing, ctx
        else:
            assert temps == [], f"{ctx}: {temps}"
        state = want
