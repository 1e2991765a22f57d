"""fieldapp.text_rules on its own: what each check refuses and the message it gives, with text
made by hypothesis (lone surrogates, control and format characters included)."""

from __future__ import annotations

import json

from hypothesis import given
from hypothesis import strategies as st

from fieldapp import text_rules

ANY_TEXT = st.text(st.characters(codec=None), max_size=30)


@given(ANY_TEXT)
def test_whatever_a_name_check_lets_through_can_be_written_as_utf8_and_is_printable(text):
    if text_rules.name_problem("Name", text) is None:
        text.encode("utf-8")  # raises for a lone surrogate
        assert text.isprintable()


@given(ANY_TEXT)
def test_whatever_a_mark_check_lets_through_has_no_slash_and_no_formula_start(text):
    if text_rules.mark_problem("Mark", text) is None:
        assert "/" not in text and not text.startswith(("=", "+", "-", "@", "\t", "\r"))


@given(ANY_TEXT)
def test_visible_text_can_always_be_written(text):
    shown = text_rules.visible(text)
    shown.encode("utf-8")
    assert not any(ch in shown for ch in "\x00\x01\x08\x0b\x1f")


@given(st.recursive(st.none() | ANY_TEXT | st.integers(),
                    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(ANY_TEXT, inner, max_size=3),
                    max_leaves=10))
def test_a_json_value_passes_only_when_every_text_in_it_is_clean(value):
    found = text_rules.invalid_text_in(value)
    if found is None:
        json.dumps(value, ensure_ascii=False).encode("utf-8")  # every text in it can be written


def test_a_lone_surrogate_is_named_with_its_field_path():
    body = json.loads('{"record": {"notes": "ok", "strata": [{"description": "a\\ud800b"}]}}')
    field, message = text_rules.invalid_text_in(body)
    assert field == "record.strata[0].description"
    assert "not valid Unicode" in message and "U+D800" in message


def test_messages_name_the_field_and_the_character():
    assert text_rules.mark_problem("Mark", "CT\x01X") == (
        "Mark must hold printable characters only: character 3 is U+0001 (a control character)")
    assert "must not contain '/'" in text_rules.mark_problem("Mark", "C1/3")
    assert text_rules.code_problem("Class", "=1+1").startswith("Class must not start with '='")
    assert text_rules.text_problem("Notes", "line one\nline two\ttab") is None
    assert "control characters" in text_rules.text_problem("Notes", "bell\x07")
