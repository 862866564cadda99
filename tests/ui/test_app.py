"""The app shell without a browser (ui/app.py, ui/views/project.py): a project that does
not load gives a page with words, never a traceback; the field to open another project
says what is wrong with a path, and a project that loads replaces the page. The whole page
in a browser: tests/ui/test_browser.py."""

from __future__ import annotations

from pathlib import Path

from ui.app import create_app
from ui.views.project import ProjectOpener


def page_text(obj) -> str:
    """Text of every pane under a Panel layout (Alert and HTML objects)."""
    found = []

    def walk(o):
        text = getattr(o, "object", None)
        if isinstance(text, str):
            found.append(text)
        for child in getattr(o, "objects", []) or []:
            walk(child)
        inner = getattr(o, "__panel__", None)
        if inner is not None and not hasattr(o, "objects"):
            walk(inner())

    walk(obj)
    return "\n".join(found)


def test_a_project_that_does_not_load_gives_a_page_with_words(tmp_path):
    missing = tmp_path / "nowhere.toml"
    page = create_app(missing, persist=False)
    assert not hasattr(page, "session")
    text = page_text(page)
    assert f"The project {missing} could not be opened" in text
    assert "Traceback" not in text


def test_the_opener_says_what_is_wrong_and_hands_on_a_project_that_loads(tmp_path):
    from districting.demo import copy_demo

    opened = []
    opener = ProjectOpener(opened.append)
    opener.path.value = str(tmp_path / "notes.txt")
    opener._open(None)
    assert opener.note.visible and "ending in .toml" in opener.note.object
    bad = tmp_path / "bad.toml"
    bad.write_text("[project]\nname = 'x'\n")
    opener.path.value = str(bad)
    opener._open(None)
    assert f"The project {bad}" in opener.note.object and not opened
    good = Path(copy_demo(tmp_path / "demo"))
    opener.path.value = str(good)
    opener._open(None)
    assert opened == [good]
