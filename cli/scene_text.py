"""Replace one top-level table of a TOML file's text, keeping every other character as it was.

Used to write a measured [measurement] table into a copy of a scene. The edit is checked by reading
both texts back with tomllib: everything but the replaced table must be equal, and the table must read
back as written; otherwise the edit is refused rather than risk a silently changed scene.
"""

from __future__ import annotations

import json
import re
import tomllib

from truepull.geometry.errors import InputError

_HEADER = re.compile(r"^[ \t]*\[\[?[ \t]*(?P<name>[^\[\]#\r\n]+?)[ \t]*\]\]?[ \t]*(?:#[^\r\n]*)?\r?\n?$")
_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def toml_key(name: str) -> str:
    """A TOML key: bare when it may be, else a quoted basic string."""
    return name if _BARE_KEY.match(name) else json.dumps(name)


def toml_string(text: str) -> str:
    """A TOML basic string (JSON string escapes are valid TOML escapes)."""
    return json.dumps(text)


def _first_component(header_name: str) -> str:
    head = header_name.split(".", 1)[0].strip()
    if len(head) >= 2 and head[0] == head[-1] and head[0] in "\"'":
        head = head[1:-1]
    return head


_TRIPLES = ('"""', "'''")


def _top_level_starts(lines: list[str]) -> list[bool]:
    """For each line, whether it starts outside any string and any multi-line array, so that a
    bracket there can only open a table header."""
    out = []
    state, depth = None, 0            # state: None, a quote, or a triple quote
    for line in lines:
        out.append(state is None and depth == 0)
        i, n = 0, len(line)
        while i < n:
            ch = line[i]
            if state is None:
                if ch == "#":
                    break
                if line.startswith(_TRIPLES, i):
                    state = line[i:i + 3]
                    i += 3
                    continue
                if ch in "\"'":
                    state = ch
                elif ch == "[":
                    depth += 1
                elif ch == "]":
                    depth = max(depth - 1, 0)
            elif state in _TRIPLES:
                if state == '"""' and ch == "\\":
                    i += 2
                    continue
                if line.startswith(state, i):
                    i += 3
                    while i < n and line[i] == state[0]:   # up to two quotes may end the content
                        i += 1
                    state = None
                    continue
            else:
                if state == '"' and ch == "\\":
                    i += 2
                    continue
                if ch == state:
                    state = None
            i += 1
        if state in ('"', "'"):
            state = None                # a one-line string cannot run on: tomllib will judge
    return out


def _is_filler(line: str) -> bool:
    s = line.strip()
    return not s or s.startswith("#")


def replace_table(text: str, table: str, block: str, file=None) -> str:
    """`text` with top-level table `table` (and its sub-tables) replaced by `block`, the complete new
    table text starting with its header; appended at the end when the table is absent. Blank and
    comment lines just before the next header stay, as they usually belong to it."""
    newline = "\r\n" if "\r\n" in text else "\n"
    block = block.replace("\r\n", "\n").rstrip("\n").replace("\n", newline) + newline
    lines = text.splitlines(keepends=True)
    clean = _top_level_starts(lines)
    headers = [i for i, ln in enumerate(lines) if clean[i] and _HEADER.match(ln)]
    spans = []
    for j, i in enumerate(headers):
        if _first_component(_HEADER.match(lines[i]).group("name")) != table:
            continue
        end = headers[j + 1] if j + 1 < len(headers) else len(lines)
        while end > i + 1 and _is_filler(lines[end - 1]):
            end -= 1
        spans.append((i, end))
    if spans:
        out, last = [], 0
        for k, (i, end) in enumerate(spans):
            out.extend(lines[last:i])
            if k == 0:
                out.append(block)
            last = end
        out.extend(lines[last:])
        new_text = "".join(out)
    else:
        new_text = text
        if new_text and not new_text.endswith(("\n", "\r")):
            new_text += newline
        if new_text.strip():
            new_text += newline
        new_text += block
    _verify(text, new_text, table, block, file)
    return new_text


def _verify(old_text: str, new_text: str, table: str, block: str, file) -> None:
    try:
        old = tomllib.loads(old_text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(file, None, f"not valid TOML: {exc}") from None
    try:
        new = tomllib.loads(new_text)
        wanted = tomllib.loads(block)[table]
    except tomllib.TOMLDecodeError:
        new, wanted = None, None
    same_rest = new is not None and {k: v for k, v in old.items() if k != table} == {
        k: v for k, v in new.items() if k != table}
    if not same_rest or new.get(table) != wanted:
        raise InputError(file, table, f"cannot replace [{table}] safely in this file: write it as one "
                                      f"[{table}] table (not dotted keys or an inline table)")
