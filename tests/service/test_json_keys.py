"""Repeated names in JSON objects (service.contract.json_keys) against Python's json parser as the reference."""

from __future__ import annotations

import json
import random
from typing import Any

from service.contract.json_keys import repeated_keys


def _reference(text: str) -> list[str]:
    # Python's json module hands every object's (name, value) pairs to object_pairs_hook, repeats included.
    found: list[str] = []

    def hook(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
        names = [name for name, _ in pairs]
        found.extend(name for i, name in enumerate(names) if name in names[:i] and name not in found)
        return dict(pairs)

    json.loads(text, object_pairs_hook=hook)
    return found


_NAMES = ["x", "y", "a:b", 'q"uote', "back\\slash", "é", "{", "]", "bandwidth"]


def _value(rng: random.Random, depth: int) -> str:
    kind = rng.randrange(6 if depth < 4 else 3)
    if kind == 0:
        return json.dumps(rng.uniform(-1e3, 1e3))
    if kind == 1:
        return json.dumps(rng.choice(_NAMES + ["2025-06-16T04:00:00Z", "\\\\\"", ":"]), ensure_ascii=rng.random() < 0.5)
    if kind == 2:
        return rng.choice(["null", "true", "[]", "{}"])
    if kind == 3:
        return "[" + ", ".join(_value(rng, depth + 1) for _ in range(rng.randrange(4))) + "]"
    names = [rng.choice(_NAMES) for _ in range(rng.randrange(1, 5))]
    return "{" + ",".join(f"{json.dumps(n, ensure_ascii=rng.random() < 0.5)} : {_value(rng, depth + 1)}" for n in names) + "}"


def test_random_documents_agree_with_the_json_module() -> None:
    rng = random.Random(7)
    with_repeats = 0
    for _ in range(2000):
        text = _value(rng, 0)
        expected = _reference(text)
        with_repeats += bool(expected)
        assert sorted(repeated_keys(text.encode())) == sorted(expected), text
    assert with_repeats > 100  # the generator does produce repeats


def test_same_name_in_different_objects_is_not_a_repeat() -> None:
    body = b'{"series": [{"x": [1, 2], "y": [3, 4]}, {"x": [5], "y": [6]}], "curve": {"points": 5}}'
    assert repeated_keys(body) == []
    assert repeated_keys(b'{"bandwidth": 1, "x": [0, 1], "bandwidth": 2}') == ["bandwidth"]
    # an escaped name is the same name (RFC 8259, section 7: \u0078 is x)
    assert repeated_keys(b'{"x": [1], "\\u0078": [2]}') == ["x"]
