"""The Print tab's links (ui/views/printmap.py): the address of the printable map carries
the level, the draft and a saved option's name, quoted, and names show as text."""

from __future__ import annotations

from urllib.parse import parse_qs, urlsplit

from ui_town import new_store

from ui.session import Session
from ui.views.printmap import PrintLink, print_url


def test_print_address_round_trips_names():
    name = "Plan A & B #2 (east)"
    url = print_url("middle", "Anna's draft", name)
    assert url.startswith("./print?")
    args = parse_qs(urlsplit(url).query)
    assert args == {"level": ["middle"], "draft": ["Anna's draft"], "option": [name]}
    assert print_url("high") == "./print?level=high"


def test_print_tab_links_the_plan_and_each_saved_option(inputs):
    session = Session(new_store(inputs))
    session.store.rerun()
    session.store.save_option("East & west")
    session.state.options_version += 1
    html = PrintLink(session).links.object
    assert "href='./print?level=middle'" in html
    assert "option=East%20%26%20west" in html and ">East &amp; west</a>" in html
