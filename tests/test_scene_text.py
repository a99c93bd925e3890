"""Replacing one table of a TOML text while keeping the rest exactly; tomllib (the standard library's
TOML reader) is the outside judge of what each text means."""

from __future__ import annotations

import tomllib

import pytest

from truepull.cli.scene_text import replace_table, toml_key, toml_string
from truepull.geometry.errors import InputError

BLOCK = '[measurement]\nmethod = "swing"\nperiod = { a = "1 s", b = "2 s" }\n'
WANTED = {"method": "swing", "period": {"a": "1 s", "b": "2 s"}}


def test_replaces_in_place_and_keeps_the_rest():
    text = ('[scene]\ntitle = "x"  # note\n\n[measurement]\nmethod = "deflection"\n'
            '[measurement.old]\nk = 1\n\n# about the frame\n[frame]\naxis = [0, 0, 1]\n')
    new = replace_table(text, "measurement", BLOCK)
    assert new == ('[scene]\ntitle = "x"  # note\n\n' + BLOCK + '\n# about the frame\n[frame]\naxis = [0, 0, 1]\n')
    data = tomllib.loads(new)
    assert data["measurement"] == WANTED and data["frame"] == {"axis": [0, 0, 1]}


def test_appends_when_absent_and_keeps_crlf():
    text = '[scene]\r\ntitle = "x"\r\n'
    new = replace_table(text, "measurement", BLOCK)
    assert new.startswith(text) and "\r\n[measurement]\r\n" in new
    assert "\n" not in new.replace("\r\n", "")
    assert tomllib.loads(new)["measurement"] == WANTED


def test_header_lookalike_inside_a_string_is_not_a_header():
    text = 'note = """\n[measurement]\n"""\n[measurement]\nmethod = "deflection"\n'
    new = replace_table(text, "measurement", BLOCK)
    data = tomllib.loads(new)
    assert data["note"] == "[measurement]\n" and data["measurement"] == WANTED


def test_header_lookalike_inside_a_multiline_array_is_not_a_header():
    text = '[measurement]\nrows = [\n[1]\n]\nmethod = "x"\n[frame]\naxis = [0, 0, 1]\n'
    new = replace_table(text, "measurement", BLOCK)
    assert new == BLOCK + '[frame]\naxis = [0, 0, 1]\n'


def test_refuses_forms_it_cannot_replace():
    with pytest.raises(InputError, match="cannot replace"):
        replace_table('measurement = { method = "x" }\n', "measurement", BLOCK)
    with pytest.raises(InputError, match="not valid TOML"):
        replace_table("[scene\n", "measurement", BLOCK)


def test_keys_and_strings_read_back():
    for name in ("near", "far-1", "with space", 'quote"d', "Zürich"):
        text = f"t = {{ {toml_key(name)} = {toml_string(name + ' +- 1')} }}\n"
        assert tomllib.loads(text)["t"] == {name: name + " +- 1"}
