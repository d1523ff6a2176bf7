"""The one registry of views: id, title and the module that draws it (under ``orbitdesk.app.views``).

Everything that lists views reads this table: the window's View menu and docks, the walkthrough (which
views a step may open, their titles in its problems), the project checks and the tests. What each view
saves is defined beside it in ``view_settings.VIEW_SETTINGS`` (same ids). Headless: the module is named,
never imported here.
"""

from __future__ import annotations

from dataclasses import dataclass

from orbitdesk.document.view_settings import VIEW_SETTINGS


@dataclass(frozen=True)
class ViewInfo:
    id: str                      # the key in project files, walkthrough steps and VIEW_SETTINGS
    title: str                   # what the user reads (dock title, menu, walkthrough problems)
    module: str                  # orbitdesk.app.views.<module> exposes VIEW = the view class
    shown_at_start: bool = False
    results: tuple[str, ...] = ()  # the kinds of kept result it shows (document/results.py KINDS)

    @property
    def settings(self) -> dict:
        """What this view keeps in a project and a walkthrough step (view_settings.VIEW_SETTINGS)."""
        return VIEW_SETTINGS[self.id]


WINDOW_KEY = "_window"   # in Project.views: the window's dock layout ("state") and the time cursor

VIEWS: tuple[ViewInfo, ...] = (
    ViewInfo("timeseries", "Time series", "timeseries", shown_at_start=True),
    ViewInfo("phase_plane", "Phase plane", "phase_plane", shown_at_start=True),
    ViewInfo("phase_space_3d", "Phase space 3D", "phase_space_3d"),
    ViewInfo("equilibria", "Equilibria", "equilibria"),
    ViewInfo("cycles", "Limit cycle", "cycles"),
    ViewInfo("sections", "Poincaré section", "sections", results=("sections",)),
    ViewInfo("sweep", "Parameter sweep", "sweep", results=("sweep",)),
    ViewInfo("lyapunov", "Lyapunov exponents", "lyapunov", results=("lyapunov",)),
    ViewInfo("parameter_map", "Two-parameter map", "parameter_map", results=("parameter_map",)),
    ViewInfo("basins", "Basins of attraction", "basins", results=("basins",)),
    ViewInfo("bifurcation", "Bifurcation diagram", "bifurcation", results=("bifurcation", "bifurcation_locus")),
    ViewInfo("fit", "Fit to data", "fit", results=("fit",)),
    ViewInfo("noise_statistics", "Noise statistics", "noise_statistics"),
)
VIEW_IDS: tuple[str, ...] = tuple(v.id for v in VIEWS)
_BY_ID = {v.id: v for v in VIEWS}


def view_info(view_id: str) -> ViewInfo:
    """The registry entry of ``view_id`` (KeyError naming the views there are)."""
    try:
        return _BY_ID[view_id]
    except KeyError:
        raise KeyError(f"there is no view {view_id!r} (views: {', '.join(VIEW_IDS)})") from None


def views_showing(kinds) -> list[ViewInfo]:
    """The views that show results of these kinds (document/results.py), in the registry's order."""
    kinds = set(kinds)
    return [v for v in VIEWS if kinds & set(v.results)]


def title_of(view_id: str) -> str:
    """The view's title; for an id we do not have, the id in words ("phase_plane" -> "Phase plane")."""
    info = _BY_ID.get(view_id)
    if info is not None:
        return info.title
    words = view_id.replace("_", " ").strip()
    return words[:1].upper() + words[1:]
