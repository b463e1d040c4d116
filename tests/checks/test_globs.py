"""calib.checks.globs.common_match against the standard library's fnmatch (the reference).

Every example name it returns must be matched by both patterns per
fnmatch.fnmatchcase; when it says no name can match both, no name drawn at
random (nor any name from a small alphabet up to length 4) may match both.
"""

from __future__ import annotations

import fnmatch
import itertools

from hypothesis import given, settings
from hypothesis import strategies as st

from calib.checks.globs import common_match

TOKENS = st.sampled_from(["a", "b", "p", "2", " ", "*", "?", "[ab]", "[!a]", "[0-9]", "["])
PATTERNS = st.lists(TOKENS, max_size=5).map("".join)
ALPHABET = "abp2 [x"


def both(a: str, b: str, name: str) -> bool:
    return fnmatch.fnmatchcase(name, a.casefold()) and fnmatch.fnmatchcase(name, b.casefold())


@settings(max_examples=300, deadline=None)
@given(PATTERNS, PATTERNS)
def test_agrees_with_fnmatch(a, b):
    example = common_match(a, b)
    if example is not None:
        assert both(a, b, example), (a, b, example)
    else:
        names = ("".join(t) for n in range(5) for t in itertools.product(ALPHABET, repeat=n))
        assert not any(both(a, b, name) for name in names), (a, b)


def test_long_patterns_stay_fast():
    # Many stars would make a backtracking matcher explode; the pair walk stays small.
    a, b = "*a" * 60 + "b", "*a" * 60 + "c"
    assert common_match(a, b) is None
    assert common_match("*a" * 60, "a" * 60) == "a" * 60
