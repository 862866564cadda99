"""The one rule for names (districting.names): what it refuses, and file names from names.

Property-based checks (hypothesis) draw any Unicode text: whatever the rule accepts is
stable under the rule, and whatever a slug makes of it stays one plain file name inside
the output folder.
"""

from __future__ import annotations

import unicodedata
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from districting.names import MAX_LENGTH, BadName, check_name, path_inside, slug

HOSTILE = [
    "town/../..", "../../etc", "/etc/passwd", "C:\\Windows", "..", ".", ".hidden",
    "", "   ", "\t", "two\nlines", "cr\rhere", "nul\x00byte", "bell\x07", "x" * (MAX_LENGTH + 1),
    "<img src=x onerror=alert(1)>", "<script>alert(1)</script>", "a\u00a0b",  # no-break space
    "zero\u200bwidth", "right\u202eleft",  # invisible and bidirectional control characters
    'quote"d', "semi;colon", "pipe|name", "star*", "question?", "percent%20",
]


@pytest.mark.parametrize("text", HOSTILE)
def test_hostile_names_are_refused_with_the_rule(text):
    with pytest.raises(BadName) as err:
        check_name(text)
    message = str(err.value)
    assert "letters and digits" in message and str(MAX_LENGTH) in message
    assert "\n" not in message.replace("\\n", "")  # one line, the bad character shown escaped


@pytest.mark.parametrize("text, kept", [
    ("  Option A  ", "Option A"),
    ("Option A — keep Larkwhistle", "Option A — keep Larkwhistle"),
    ("Plan 2 (east), v1.5 & co + more: #3", "Plan 2 (east), v1.5 & co + more: #3"),
    ("O'Brien_option-2", "O'Brien_option-2"),
    ("Ωμέγα 2", "Ωμέγα 2"),
    ("École", "École"),
    ("E\u0301cole", "\u00c9cole"),  # decomposed é is stored composed (NFC)
    ("x" * MAX_LENGTH, "x" * MAX_LENGTH),
])
def test_ordinary_names_are_kept_normalised(text, kept):
    assert check_name(text) == kept


def test_the_message_names_the_character_at_fault():
    with pytest.raises(BadName, match=r"'/' solidus \(U\+002F\)"):
        check_name("east/west")
    with pytest.raises(BadName, match=r"line break \(U\+000A\)"):
        check_name("east\nwest")
    with pytest.raises(BadName, match="300 characters long"):
        check_name("x" * 300)


def test_slug_is_a_plain_file_name():
    assert slug("Option A — keep Larkwhistle") == "option-a-keep-larkwhistle"
    assert slug("École Nord (2027)") == "ecole-nord-2027"
    assert slug("A/B: 1") == "a-b-1"
    assert slug("..") == "option" and slug("   ", fallback="unsaved") == "unsaved"
    assert slug("Ωμέγα") == "ωμεγα"  # letters of other scripts stay


def test_path_inside_refuses_a_way_out(tmp_path):
    assert path_inside(tmp_path, "plan-a") == (tmp_path / "plan-a").resolve()
    for name in ("..", "../x", "/tmp/x", "", "."):
        with pytest.raises(BadName, match="outside"):
            path_inside(tmp_path, name)
    (tmp_path / "link").symlink_to(tmp_path.parent)  # a link out of the folder
    with pytest.raises(BadName):
        path_inside(tmp_path, "link")


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=120))
def test_any_text_is_refused_or_kept_stable(text):
    try:
        name = check_name(text)
    except BadName:
        return
    assert check_name(name) == name  # idempotent
    assert name == unicodedata.normalize("NFC", name) and name == name.strip()
    assert 1 <= len(name) <= MAX_LENGTH
    assert not name.startswith(".")
    assert not any(c in name for c in "/\\<>\"\n\r\t\x00")


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=200))
def test_any_slug_stays_inside_the_folder(text):
    s = slug(text)
    assert s and len(s) <= MAX_LENGTH and "/" not in s and "\\" not in s and "." not in s
    base = Path("/srv/out")
    assert (base / s).parent == base  # one plain component, never a way out
