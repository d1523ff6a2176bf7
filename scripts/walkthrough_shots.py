#!/usr/bin/env python3
"""A window picture of every walkthrough step of every sample, to look at each step as a user meets it.

    .venv/bin/python scripts/walkthrough_shots.py [SAMPLE ...] [--out /tmp/tour] [--timeout 900] [--exports]

Each sample runs in a child process of its own (a crash or a hang names its sample and the others still
run): the child opens the sample from Help > Sample Projects in the real main window at 1600x1000, shows
each step through the walkthrough panel, waits until the session has no job running or queued and no run
pending, and saves the window as OUT/<sample>/<NN>.png (NN from 01). Beside the pictures, OUT/<sample>/
steps.txt lists each step's title, note, the run's status and anything the step could not apply, so the
picture can be read against the note. With --exports each open view is also exported once per sample
as File > Export writes it (OUT/<sample>/<sample>-NN-<view>.png/.svg/.csv) and the HTML report at the
last step (OUT/<sample>/<sample>-report.html), to open them as a person would. Without a screen
(DISPLAY unset) one private Xvfb serves all children (see make_screenshots.ensure_display).
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from make_screenshots import (ROOT, SAMPLES, SCREEN, Shooter, ensure_display, export_each_view,  # noqa: E402
                              export_report)

OUT = Path("/tmp/tour")


def shoot_sample(name: str, out: Path, exports: bool = False) -> int:
    """In the child: every step of one sample; returns how many steps reported problems."""
    folder = out / name
    folder.mkdir(parents=True, exist_ok=True)
    for old in folder.glob("*.png"):
        old.unlink()
    sh = Shooter(folder)
    w = sh.window
    w.resize(*SCREEN)
    w.move(0, 0)
    sh.settle()
    sh.open_sample(name)
    panel = w.walkthrough_panel
    troubled = 0
    lines = []
    seen: set = set()
    for i, step in enumerate(panel.steps):
        problems = panel.show_step(i)
        sh.settle()
        sh.save(f"{i + 1:02d}")
        if exports:
            export_each_view(sh, name, i + 1, seen)
        traj = w.session.trajectory
        status = "none" if traj is None else f"{traj.status}" + (f" ({traj.message})" if traj.message else "")
        views = [v for v, d in w.view_docks.items() if d.isVisible()]
        lines += [f"## {i + 1:02d} {step.title}", f"views shown: {', '.join(views)}", f"run: {status}"]
        if problems or panel.missing_views:
            troubled += 1
            lines.append(f"PROBLEMS: {problems} missing views: {panel.missing_views}")
        lines += [step.note, ""]
    (folder / "steps.txt").write_text("\n".join(lines), encoding="utf-8")
    if exports:
        export_report(sh, folder / f"{name}-report.html")
    panel.leave()
    sh.settle()
    w.session.undo_stack.setClean()
    w.session.shutdown()
    w.close()
    sh.app.processEvents()
    return troubled


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("samples", nargs="*", metavar="SAMPLE", help="sample names (all when none are named)")
    parser.add_argument("--out", type=Path, default=OUT, help=f"folder for the pictures (default {OUT})")
    parser.add_argument("--timeout", type=float, default=900.0, help="seconds one sample may take (default 900)")
    parser.add_argument("--exports", action="store_true",
                        help="also export each open view once per sample (PNG, SVG, CSV) and the HTML report")
    parser.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    names = args.samples or sorted(p.stem for p in SAMPLES.glob("*.orbitdesk"))
    unknown = [n for n in names if not (SAMPLES / f"{n}.orbitdesk").is_file()]
    if unknown:
        parser.error(f"no sample called {', '.join(unknown)}")
    if args.child:
        troubled = shoot_sample(names[0], args.out, args.exports)
        sys.stdout.flush()
        os._exit(3 if troubled else 0)  # no teardown of Qt objects against a screen that may go away
    xvfb = ensure_display()
    failed = []
    try:
        for name in names:
            print(f"{name}:", flush=True)
            start = time.monotonic()
            try:
                rc = subprocess.run([sys.executable, __file__, "--child", "--out", str(args.out), name]
                                    + ["--exports"] * args.exports, cwd=ROOT, timeout=args.timeout).returncode
            except subprocess.TimeoutExpired:
                rc = "timeout"
            took = time.monotonic() - start
            if rc != 0:
                what = {3: "steps with problems (see steps.txt)", "timeout": f"no end after {args.timeout:.0f} s"}
                failed.append(f"{name}: {what.get(rc, f'crashed (exit {rc})')}")
            print(f"  {name}: {'done' if rc == 0 else failed[-1]} in {took:.0f} s", flush=True)
    finally:
        if xvfb is not None:
            xvfb.terminate()
            xvfb.wait(5)
    print("\n".join(["", "every sample shot" if not failed else "trouble:", *failed]))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
