"""dha.memo.ObjectMemo: values remembered per object identity and tag (common practice, no
source: the behaviour the per-library caches of identify, quantify, bulk, volatility, unifac,
octane and fuel_data rely on)."""
from __future__ import annotations

import pandas as pd

from dha.memo import ObjectMemo


def test_memo_keys_on_identity_and_tag_and_stays_bounded():
    memo = ObjectMemo(size=3)
    calls = []

    def build(value):
        def make():
            calls.append(value)
            return value
        return make

    a = pd.DataFrame({"x": [1, 2]})
    b = a.copy()                           # equal content, another object: its own entry
    assert memo.get(a, build("a")) == "a"
    assert memo.get(a, build("again")) == "a"
    assert memo.get(b, build("b")) == "b"
    # two tags of one object live side by side
    assert memo.get(a, build("a-C7"), tag=7) == "a-C7"
    assert memo.get(a, build("no"), tag=7) == "a-C7"
    assert memo.get(a, build("no")) == "a"
    assert calls == ["a", "b", "a-C7"]
    # full: starts again rather than growing
    memo.get(b, build("b-1"), tag=1)
    assert len(memo._entries) <= 3
