"""The one registry of views (document/views.py) against what it names: each view's saved settings are
defined (view_settings.py), its module exists under app/views, and every sample's walkthrough steps name
only views and settings there are."""

import ast
from pathlib import Path

import pytest

from orbitdesk.document import project as project_module
from orbitdesk.document.view_settings import VIEW_SETTINGS, missing_names, unknown_keys
from orbitdesk.document.views import VIEW_IDS, VIEWS, title_of, view_info
from orbitdesk.document.walkthrough import VIEW_IDS as WALKTHROUGH_VIEW_IDS
from orbitdesk.language.model import parse_model
from orbitdesk.samples import sample_paths

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = sample_paths()


def test_registry_and_settings_name_the_same_views():
    assert set(VIEW_IDS) == set(VIEW_SETTINGS) and len(VIEW_IDS) == len(VIEWS)
    assert WALKTHROUGH_VIEW_IDS is VIEW_IDS
    assert view_info("sweep").settings is VIEW_SETTINGS["sweep"]
    with pytest.raises(KeyError, match="there is no view 'nope'"):
        view_info("nope")
    assert title_of("not_a_view") == "Not a view"


@pytest.mark.parametrize("info", VIEWS, ids=lambda v: v.id)
def test_each_view_module_declares_the_registry_id_and_title(info):
    # read the module's source (this folder is headless: the Qt module is not imported here)
    tree = ast.parse((ROOT / "orbitdesk" / "app" / "views" / f"{info.module}.py").read_text(encoding="utf-8"))
    declared = {}
    for node in ast.walk(tree):
        if isinstance(node, ast.Assign) and len(node.targets) == 1 and isinstance(node.targets[0], ast.Name):
            if node.targets[0].id in ("view_id", "title") and isinstance(node.value, ast.Constant):
                declared[node.targets[0].id] = node.value.value
    assert declared == {"view_id": info.id, "title": info.title}


def test_there_are_samples():
    assert len(SAMPLES) >= 10


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
def test_sample_walkthrough_steps_name_only_existing_views_and_settings(path):
    project = project_module.load(path)
    assert project.walkthrough
    parsed = parse_model(project.model)
    time = "n" if parsed.kind == "map" else "t"
    known = {"series": {*parsed.states, *parsed.derived, time}, "state": set(parsed.states),
             "parameter": set(parsed.parameters)}
    for view_id, settings in project.views.items():
        if view_id.startswith("_"):  # kept results and window state, not a view's settings
            continue
        assert view_id in VIEW_IDS, (path.stem, view_id)
        assert unknown_keys(view_id, settings) == [], (path.stem, view_id)
        assert missing_names(view_id, settings, known) == [], (path.stem, view_id)
    for step in project.walkthrough:
        snap = step.snapshot
        for view_id in snap.get("open_views", []):
            assert view_id in VIEW_IDS, (path.stem, step.title, view_id)
        for view_id, settings in snap.get("views", {}).items():
            assert view_id in VIEW_IDS, (path.stem, step.title, view_id)
            assert unknown_keys(view_id, settings) == [], (path.stem, step.title, view_id)
            assert missing_names(view_id, settings, known) == [], (path.stem, step.title, view_id)


def test_every_kind_of_kept_result_is_shown_by_one_view_and_each_view_declares_what_it_shows():
    from orbitdesk.document.results import KINDS
    from orbitdesk.document.views import views_showing

    for kind in KINDS:
        assert len(views_showing([kind])) == 1, kind
    for info in VIEWS:
        tree = ast.parse((ROOT / "orbitdesk" / "app" / "views" / f"{info.module}.py").read_text(encoding="utf-8"))
        declared = [node.value.value for node in ast.walk(tree) if isinstance(node, ast.Assign)
                    and any(isinstance(t, ast.Name) and t.id == "result_kind" for t in node.targets)
                    and isinstance(node.value, ast.Constant) and node.value.value is not None]
        assert set(declared) <= set(info.results), info.id
    assert [v.id for v in views_showing(["bifurcation_locus", "sweep"])] == ["sweep", "bifurcation"]
