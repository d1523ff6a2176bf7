#!/usr/bin/env python3
"""Regenerate the README's screenshots from the real app: ``docs/screenshots/*.png``.

    .venv/bin/python scripts/make_screenshots.py [--only NAME ...] [--out DIR]

Every walkthrough step of the samples, one picture each: scripts/walkthrough_shots.py (it uses the
Shooter below).

Opens sample projects in the main window, shows walkthrough steps, waits until every background job
has finished and saves the whole window. Without a screen (DISPLAY unset) it starts a private Xvfb,
or re-runs itself under ``xvfb-run``.
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "orbitdesk" / "samples"
OUT = ROOT / "docs" / "screenshots"
SCREEN = (1600, 1000)
WINDOW = (1440, 900)


# ---------------------------------------------------------------- a screen to draw on

def _free_display() -> int:
    for n in range(97, 160):
        if not Path(f"/tmp/.X{n}-lock").exists() and not Path(f"/tmp/.X11-unix/X{n}").exists():
            return n
    raise SystemExit("make_screenshots: no free X display number found")


def ensure_display():
    """Return the Xvfb process we started (or None when a screen was there already)."""
    if os.environ.get("DISPLAY"):
        return None
    if shutil.which("Xvfb"):
        n = _free_display()
        proc = subprocess.Popen(["Xvfb", f":{n}", "-screen", "0", f"{SCREEN[0]}x{SCREEN[1]}x24", "-nolisten", "tcp"],
                                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        for _ in range(100):
            if Path(f"/tmp/.X11-unix/X{n}").exists():
                break
            if proc.poll() is not None:
                raise SystemExit("make_screenshots: Xvfb did not start")
            time.sleep(0.05)
        os.environ["DISPLAY"] = f":{n}"
        return proc
    if shutil.which("xvfb-run") and not os.environ.get("ORBITDESK_UNDER_XVFB_RUN"):
        os.environ["ORBITDESK_UNDER_XVFB_RUN"] = "1"
        args = ["xvfb-run", "-a", "-s", f"-screen 0 {SCREEN[0]}x{SCREEN[1]}x24", sys.executable, *sys.argv]
        os.execvp("xvfb-run", args)
    raise SystemExit("make_screenshots: no screen and no Xvfb (apt-get install xvfb)")


# ---------------------------------------------------------------- waiting and shooting

class Shooter:
    def __init__(self, out: Path):
        os.environ.setdefault("QT_QPA_PLATFORM", "xcb")
        os.environ.setdefault("ORBITDESK_NO_DIALOGS", "1")
        from PySide6.QtCore import QSettings, QStandardPaths

        QStandardPaths.setTestModeEnabled(True)  # no recent files or window settings of the user
        from orbitdesk.app.launch import make_application

        self.app = make_application(["orbitdesk"])
        QSettings().clear()
        from orbitdesk.app.main_window import MainWindow

        self.window = MainWindow()
        self.window.resize(*WINDOW)
        self.window.move(0, 0)
        self.window.show()
        self.out = out
        self.spin(0.5)

    def pump(self) -> None:
        """What the app's event loop does each round, deleting the objects marked for deletion too
        (processEvents alone leaves them on screen: stale tab bars and labels seen nowhere in the app)."""
        from PySide6.QtCore import QCoreApplication, QEvent

        self.app.processEvents()
        QCoreApplication.sendPostedEvents(None, QEvent.Type.DeferredDelete)

    def spin(self, seconds: float) -> None:
        end = time.monotonic() + seconds
        while time.monotonic() < end:
            self.pump()
            time.sleep(0.01)

    def settle(self, timeout: float = 180.0, quiet: float = 0.8) -> None:
        """Until no background job has run for ``quiet`` seconds (or ``timeout``)."""
        s = self.window.session
        end, calm_since = time.monotonic() + timeout, None
        while time.monotonic() < end:
            self.pump()
            busy = s.busy or s._run_timer.isActive() or s._validate_timer.isActive()
            if busy:
                calm_since = None
            elif calm_since is None:
                calm_since = time.monotonic()
            elif time.monotonic() - calm_since >= quiet:
                return
            time.sleep(0.02)
        print("  (still busy after the timeout; shooting anyway)")

    def open_sample(self, name: str) -> None:
        from orbitdesk.app import help as help_ui

        w = self.window
        w.session.undo_stack.setClean()
        help_ui.open_sample(w, SAMPLES / f"{name}.orbitdesk")
        self.settle()

    def show_step(self, index: int) -> None:
        panel = self.window.walkthrough_panel
        panel.show_step(index)
        self.settle()
        if panel.problems:
            print(f"  step {index + 1} problems: {panel.problems}")

    def save(self, name: str, widget=None) -> Path:
        self.spin(0.3)
        path = self.out / f"{name}.png"
        (widget or self.window).grab().save(str(path), "PNG")
        shown = path.relative_to(ROOT) if path.is_relative_to(ROOT) else path
        size = (widget or self.window).size()
        print(f"  wrote {shown} ({size.width()}x{size.height()})")
        return path


# ---------------------------------------------------------------- the shots

def convection_loop_3d(sh: Shooter) -> None:
    """Heated convection loop: every rest state unstable, the path in 3D around the two saddle-foci."""
    sh.open_sample("convection_loop")
    sh.show_step(3)
    sh.save("convection_loop_3d")


def shaken_beam_sections(sh: Shooter) -> None:
    """Shaken beam: period doubling seen in the time series and in the stroboscopic section."""
    sh.open_sample("shaken_beam")
    sh.show_step(3)
    sh.save("shaken_beam_sections")


def pendulum_separatrix(sh: Shooter) -> None:
    """Pendulum: the phase plane with the separatrix between swinging and going over the top."""
    sh.open_sample("pendulum")
    sh.show_step(4)
    sh.save("pendulum_separatrix")


def insect_generations_sweep(sh: Shooter) -> None:
    """Moths year by year: the orbit diagram of the logistic map."""
    sh.open_sample("insect_generations")
    sh.show_step(3)
    sh.save("insect_generations_sweep")


def stirred_tank_bifurcation(sh: Shooter) -> None:
    """A stirred tank that ignites and goes out: the S-shaped branch with its two folds."""
    sh.open_sample("stirred_tank")
    sh.show_step(3)
    sh.save("stirred_tank_bifurcation")


def walkthrough_presenting(sh: Shooter) -> None:
    """A walkthrough in presenting mode: full screen, large type."""
    sh.open_sample("pond_predators")
    panel = sh.window.walkthrough_panel
    sh.show_step(3)
    panel.set_presenting(True)
    screen = sh.app.primaryScreen().geometry()
    if sh.window.size() != screen.size():  # Xvfb has no window manager to make the window full screen
        sh.window.setGeometry(screen)
    sh.settle()
    sh.save("walkthrough_presenting")
    panel.set_presenting(False)
    panel.leave()
    sh.window.showNormal()
    sh.window.setGeometry(0, 0, *WINDOW)
    sh.settle()


def language_reference(sh: Shooter) -> None:
    """Help > Model Language."""
    from orbitdesk.app import help as help_ui

    ref = help_ui.show_language_reference(sh.window)
    ref.resize(900, 640)
    sh.spin(0.5)
    sh.save("language_reference", ref)
    ref.close()


def bracket_fit(sh: Shooter) -> None:
    """A plucked bracket: the invented records over the first guess, then fitted with residuals shown."""
    sh.open_sample("bracket_pluck")
    sh.show_step(0)
    sh.save("bracket_fit_overlay")
    sh.show_step(3)
    view = sh.window.ensure_view("fit")
    view.run_fit()
    sh.settle()
    view.residuals_box.setChecked(True)
    sh.settle()
    sh.save("bracket_fit_results")


def rocking_buoy_noise(sh: Shooter) -> None:
    """A buoy rocked by choppy water: realisations with mean and band, the histogram of the stationary part."""
    sh.open_sample("rocking_buoy")
    sh.show_step(1)
    sh.save("rocking_buoy_noise")


SHOTS = [convection_loop_3d, shaken_beam_sections, pendulum_separatrix, insect_generations_sweep,
         stirred_tank_bifurcation, walkthrough_presenting, language_reference, bracket_fit, rocking_buoy_noise]


def export_each_view(sh: Shooter, name: str, step: int, seen: set) -> None:
    """Export every plot of each open view not exported before as PNG and SVG, and its data as CSV, the way
    File > Export does (files NAME-NN-VIEW[-K].png/.svg/.csv), to open them as a person would."""
    from orbitdesk.app.plots import figures

    w = sh.window
    for module, view in w.views.items():
        dock = w.view_docks.get(module)
        if view is None or dock is None or not dock.isVisible() or module in seen:
            continue
        seen.add(module)
        stem = sh.out / f"{name}-{step:02d}-{module}"
        plots = figures.view_plots(view) or [None]
        for k, choice in enumerate(plots):
            suffix = f"-{k + 1}" if len(plots) > 1 else ""
            for ext in ("png", "svg"):
                ok = w.export_plot(f"{stem}{suffix}.{ext}", view=view, plot=None if choice is None else choice.plot)
                print(f"  {'wrote' if ok else 'nothing for'} {stem.name}{suffix}.{ext}")
        if w.export_data(f"{stem}.csv", view=view):
            print(f"  wrote {stem.name}.csv")


def export_report(sh: Shooter, path: Path) -> None:
    """The window's HTML report, as File > Export > HTML Report writes it."""
    from orbitdesk.app import exports as app_exports

    done = []
    app_exports.export_report(sh.window, path, on_done=lambda *a: done.append(a))
    end = time.monotonic() + 300
    while not done and time.monotonic() < end:
        sh.pump()
        time.sleep(0.02)
    print(f"  report: {done[0] if done else 'not written in time'}")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--only", nargs="*", metavar="NAME", help="just these shots: "
                        + ", ".join(f.__name__ for f in SHOTS))
    parser.add_argument("--out", type=Path, default=OUT, help=f"folder for the PNG files (default {OUT})")
    args = parser.parse_args(argv)
    wanted = [f for f in SHOTS if not args.only or f.__name__ in args.only]
    unknown = set(args.only or ()) - {f.__name__ for f in SHOTS}
    if unknown:
        parser.error(f"no shot called {', '.join(sorted(unknown))}")
    xvfb = ensure_display()
    try:
        args.out.mkdir(parents=True, exist_ok=True)
        sh = Shooter(args.out)
        for shot in wanted:
            print(f"{shot.__name__}: {shot.__doc__.splitlines()[0]}")
            shot(sh)
        sh.window.session.undo_stack.setClean()
        sh.window.session.shutdown()
        sh.window.close()
        sh.app.processEvents()
    finally:
        sys.stdout.flush()
        if xvfb is not None:
            xvfb.terminate()
            xvfb.wait(5)
            os._exit(0)  # the Qt objects would otherwise be torn down against a closed X server
    return 0


if __name__ == "__main__":
    sys.exit(main())
