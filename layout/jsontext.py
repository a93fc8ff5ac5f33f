"""The plan's two JSON texts: RFC 8785 canonical bytes for the fingerprint, and the readable file.

The rfc8785 library is the reference, but it serialises value by value in Python, which
for 100,000 slots takes seconds. The unit, slot and round lists hold only strings, whole
numbers, None and string-keyed objects; for such values the standard library's json module
writes exactly what RFC 8785 prescribes (the same escapes, no spaces, keys sorted), so
those lists go through it. Anything else — a float, or an object key outside the Basic
Multilingual Plane, where RFC 8785's UTF-16 key order and Python's code-point order could
differ — goes through rfc8785. tests/test_plan.py compares both against rfc8785 alone.
"""

from __future__ import annotations

import json
from typing import Any, Final

import rfc8785

BIG_LISTS: Final = ("units", "slots", "rounds")


def _simple(value: Any) -> bool:
    """Whether json.dumps writes value exactly as RFC 8785 does (one pass, no recursion: it runs over every cell)."""
    stack = [value]
    while stack:
        v = stack.pop()
        t = type(v)
        if t is str or v is None or t is bool:
            continue
        if t is int:
            if not -(2**53) < v < 2**53:
                return False
        elif t is list or t is tuple:
            stack.extend(v)
        elif t is dict:
            for k in v:
                if type(k) is not str or (not k.isascii() and max(map(ord, k)) >= 0xD800):
                    return False
            stack.extend(v.values())
        else:
            return False
    return True


def _canonical_part(value: Any, simple: bool) -> str:
    if isinstance(value, list) and (simple or _simple(value)):
        return json.dumps(value, ensure_ascii=False, sort_keys=True, separators=(",", ":"))
    return rfc8785.dumps(value).decode("utf-8")


def canonical_bytes(data: dict[str, Any], simple: frozenset[str] = frozenset()) -> bytes:
    """RFC 8785 canonical JSON of a dict of plan parts (its keys ASCII, sorted here).

    simple names parts the caller built itself and knows to be simple (see Plan.fingerprint);
    every other part is looked at value by value.
    """
    parts = [f"{json.dumps(k)}:{_canonical_part(data[k], k in simple)}" for k in sorted(data)]
    return ("{" + ",".join(parts) + "}").encode("utf-8")


def scalar(value: Any) -> str:
    return rfc8785.dumps(value).decode("utf-8")


def _inline(value: Any) -> str:
    if isinstance(value, dict):
        return "{" + ", ".join(f"{scalar(k)}: {_inline(v)}" for k, v in value.items()) + "}"
    if isinstance(value, list | tuple):
        return "[" + ", ".join(_inline(v) for v in value) + "]"
    return scalar(value)


def _indented(value: Any, depth: int) -> str:
    pad = " " * (depth + 1)
    if isinstance(value, dict) and value:
        inner = ",\n".join(f"{pad}{scalar(k)}: {_indented(v, depth + 1)}" for k, v in value.items())
        return "{\n" + inner + "\n" + " " * depth + "}"
    if isinstance(value, list | tuple) and value and any(isinstance(v, dict | list) for v in value):
        inner = ",\n".join(pad + _indented(v, depth + 1) for v in value)
        return "[\n" + inner + "\n" + " " * depth + "]"
    return _inline(value)


def _item_lines(items: list[Any]) -> list[str]:
    """Each item of a simple list of objects as json writes it, from one call for the whole list.

    Between two objects json writes '}, {"'; inside a string a quote is always escaped, so the
    sequence marks item boundaries only. Should the count still differ (an object nested in a
    list), each item is written on its own.
    """
    if not items:
        return []
    whole = json.dumps(items, ensure_ascii=False, separators=(", ", ": "))[1:-1]
    pieces = whole.split('}, {"')
    if len(pieces) != len(items) or not all(isinstance(i, dict) and i for i in items):
        return [json.dumps(item, ensure_ascii=False, separators=(", ", ": ")) for item in items]
    if len(pieces) == 1:
        return pieces
    return [pieces[0] + "}", *('{"' + p + "}" for p in pieces[1:-1]), '{"' + pieces[-1]]


def readable_json(data: dict[str, Any], simple: frozenset[str] = frozenset()) -> str:
    """Indented JSON, one line per unit, slot and round so diffs stay readable; numbers as RFC 8785 writes them."""
    parts = []
    for key, value in data.items():
        if key in BIG_LISTS:
            fast = key in simple or _simple(value)
            lines = _item_lines(value) if fast else [_inline(item) for item in value]
            text = "[\n" + ",\n".join("  " + line for line in lines) + "\n ]"
        else:
            text = _indented(value, 1)
        parts.append(f" {scalar(key)}: {text}")
    return "{\n" + ",\n".join(parts) + "\n}\n"
