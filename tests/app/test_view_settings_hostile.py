"""Every view opens on hostile settings from a project (issue 10, item 7): counts of 3e9, ranges of
1e308, negative numbers, NaN, strings where numbers belong, lists where flags belong. The project
loader checks and clamps each setting once (core.view_settings.clean_settings); the view then shows
its defaults or the clamped values, and what it saves again is within bounds."""

import math

import pytest

from orbitdesk.document.project import FORMAT_NAME, ProjectError, project_from_dict
from orbitdesk.document.view_settings import BOUNDS, NUMBER_SPAN, VIEW_SETTINGS
from orbitdesk.app import views as views_pkg

from .conftest import wait_for_trajectory
from .test_view_settings_schema import DUFFING

VARIANTS = {
    "huge": lambda kind: [[0.0, 1e308], [-1e308, 1e308]] if kind in ("list", "table") else 3e9 if kind == "integer"
    else 1e308,
    "negative": lambda kind: -3e9 if kind == "integer" else -1e308,
    "nan": lambda kind: math.nan,
    "strings": lambda kind: "many",
    "wrong containers": lambda kind: {"a": [1e308]} if kind in ("list", "series list") else [1, "x"],
}


def hostile(schema, variant):
    return {key: hostile(kind, variant) if isinstance(kind, dict) else VARIANTS[variant](kind)
            for key, kind in schema.items()}


def bounded(view_id, schema, settings, prefix=""):
    for key, value in settings.items():
        kind, path = schema.get(key), prefix + key
        if isinstance(value, float):
            assert math.isfinite(value), (path, value)
            lo, hi = BOUNDS.get((view_id, path), (-NUMBER_SPAN, NUMBER_SPAN))
            assert lo <= value <= hi, (path, value)
        if isinstance(kind, dict) and isinstance(value, dict):
            bounded(view_id, kind, value, path + ".")
        elif kind == "integer" and value is not None:
            assert isinstance(value, int) and abs(value) <= 10_000_000, (path, value)


@pytest.mark.parametrize("variant", sorted(VARIANTS))
@pytest.mark.parametrize("module", views_pkg.VIEW_MODULES)
def test_view_opens_on_hostile_settings(qtbot, session, module, variant):
    view_class = views_pkg.load_view_class(module)
    view_id = view_class.view_id
    doc = {"format": FORMAT_NAME, "version": 1, "model": DUFFING, "solver": {"t_end": 20.0, "samples": 400},
           "views": {view_id: hostile(VIEW_SETTINGS[view_id], variant)}}
    settings = doc["views"][view_id]
    try:
        project = project_from_dict(doc)
    except ProjectError as err:  # NaN is refused by the project reader (JSON has no NaN): it may come
        assert "finite number" in err.message  # from a walkthrough step or a script instead
        project = project_from_dict({**doc, "views": {}})
        project.views[view_id] = settings
    else:
        assert project.load_warnings  # each change is reported in plain words
    wait_for_trajectory(qtbot, session, lambda: session.load_project(project))
    view = view_class(session)
    qtbot.addWidget(view)
    view.resize(700, 500)
    view.show()
    qtbot.waitExposed(view)
    qtbot.wait(50)
    bounded(view_id, VIEW_SETTINGS[view_id], view.view_settings())
