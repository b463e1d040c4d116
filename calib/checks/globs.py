"""Whether two glob patterns can match the same name, and an example of one.

Used to refuse a profile whose ``[[analyte]]`` patterns overlap (``Pb*`` and
``*220*`` both match ``Pb 220.353``) when it is loaded, before any run shows
it.  A glob here is what :mod:`fnmatch` reads: ``*`` any run of characters,
``?`` one character, ``[abc]`` / ``[a-z]`` / ``[!abc]`` one character of (or
not of) a set, anything else itself.  Both patterns are compared case-folded.
The search walks the pair of positions (one in each pattern) breadth first,
so it takes at most (len(a) + 1) · (len(b) + 1) steps: no backtracking blow-up.
"""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass

__all__ = ["common_match"]

_ANY = "*"
_CANDIDATES = "abcdefghijklmnopqrstuvwxyz0123456789 ._-"


@dataclass(frozen=True)
class _Set:
    """One character position: a set of characters as intervals, or its complement."""

    ranges: tuple[tuple[str, str], ...]
    negated: bool = False

    def has(self, c: str) -> bool:
        inside = any(lo <= c <= hi for lo, hi in self.ranges)
        return inside != self.negated


def _tokens(pattern: str) -> list[_Set | str]:
    """The pattern as character sets and ``*`` (as :func:`fnmatch.translate` reads it)."""
    out: list[_Set | str] = []
    i, n = 0, len(pattern)
    while i < n:
        c = pattern[i]
        i += 1
        if c == "*":
            if not out or out[-1] != _ANY:
                out.append(_ANY)
        elif c == "?":
            out.append(_Set((), negated=True))
        elif c == "[":
            j = i
            if j < n and pattern[j] == "!":
                j += 1
            if j < n and pattern[j] == "]":
                j += 1
            while j < n and pattern[j] != "]":
                j += 1
            if j >= n:  # no closing bracket: a literal "["
                out.append(_Set((("[", "["),)))
                continue
            body, i = pattern[i:j], j + 1
            negated = body.startswith("!")
            body = body[1:] if negated else body
            ranges, k = [], 0
            while k < len(body):
                if k + 2 < len(body) and body[k + 1] == "-":
                    if body[k] <= body[k + 2]:
                        ranges.append((body[k], body[k + 2]))
                    k += 3
                else:
                    ranges.append((body[k], body[k]))
                    k += 1
            out.append(_Set(tuple(ranges), negated))
        else:
            out.append(_Set(((c, c),)))
    return out


def _shared(a: _Set, b: _Set) -> str | None:
    """A character both sets hold, or None."""
    edges = [c for s in (a, b) for lo, hi in s.ranges for c in (lo, hi, chr(ord(hi) + 1))
             if ord(hi) < 0x10FFFF] + [lo for s in (a, b) for lo, _ in s.ranges]
    for c in [*_CANDIDATES, *edges]:
        if a.has(c) and b.has(c):
            return c
    return None


def common_match(a: str, b: str) -> str | None:
    """A name both globs match (case-folded), or None when no name can match both.

    Examples
    --------
    >>> common_match("Pb*", "*220*")
    'pb220'
    >>> common_match("Pb*", "Cu*") is None, common_match("[a-c]?", "[!a]x")
    (True, 'bx')
    >>> common_match("Cd 228.802", "cd 228.802")
    'cd 228.802'
    """
    ta, tb = _tokens(a.casefold()), _tokens(b.casefold())
    start, goal = (0, 0), (len(ta), len(tb))
    parent: dict[tuple[int, int], tuple[tuple[int, int], str] | None] = {start: None}
    queue = deque([start])
    while queue:
        i, j = state = queue.popleft()
        if state == goal:
            text = []
            while parent[state] is not None:
                state, c = parent[state]  # type: ignore[misc]
                text.append(c)
            return "".join(reversed(text))
        steps: list[tuple[tuple[int, int], str]] = []
        if i < len(ta) and ta[i] == _ANY:
            steps.append(((i + 1, j), ""))
        if j < len(tb) and tb[j] == _ANY:
            steps.append(((i, j + 1), ""))
        if i < len(ta) and j < len(tb):
            sa = _Set((), True) if ta[i] == _ANY else ta[i]
            sb = _Set((), True) if tb[j] == _ANY else tb[j]
            c = _shared(sa, sb)  # type: ignore[arg-type]
            if c is not None:
                steps.append(((i if ta[i] == _ANY else i + 1, j if tb[j] == _ANY else j + 1),
                              c))
        for nxt, c in steps:
            if nxt not in parent and nxt != (i, j):
                parent[nxt] = ((i, j), c)
                queue.append(nxt)
    return None
