"""Printed names of signers: which are usable, and when two of them name the same person.

A signature's printed name is what a reader of the record sees, so it must
look like what it is.  :func:`check_printed_name` refuses names that can hide
what they say:

- control and format characters (zero-width spaces and joiners, direction
  marks, soft hyphens): invisible, so two names that look alike differ;
- letters from more than one script (a Cyrillic ``а`` among Latin letters):
  the classic look-alike trick (Unicode Technical Standard #39 calls such text
  "mixed-script"); Chinese, Japanese and Korean count as one writing system.

Names are compared by :func:`person_key`, which is deliberately generous:
after Unicode NFKC normalisation it keeps the words only (punctuation dropped,
accents removed, case folded) and sorts them, so "A. Preparer",
"A Preparer", "Preparer, A." and "a preparer" are one person.
:func:`same_person` further treats an initial as matching any word starting
with it ("A. Preparer" and "Anna Preparer").  For the separation of duties a
false "same person" only asks for another signer, while a false "different
people" would let one person approve their own work.
"""

from __future__ import annotations

import unicodedata

__all__ = ["check_printed_name", "clean_name", "person_key", "same_person"]

_MAX_LENGTH = 200
# Scripts whose letters are one writing system for this purpose.
_SCRIPT_GROUPS = {"CJK": "CJK", "HIRAGANA": "CJK", "KATAKANA": "CJK", "HANGUL": "CJK",
                  "IDEOGRAPHIC": "CJK"}


def _script(char: str) -> str | None:
    """The script of a letter, from its Unicode name ("LATIN SMALL LETTER A" → LATIN)."""
    if not unicodedata.category(char).startswith("L"):
        return None
    name = unicodedata.name(char, "")
    first = name.split(" ", 1)[0] if name else "UNKNOWN"
    return _SCRIPT_GROUPS.get(first, first)


def check_printed_name(name: object, *, what: str = "printed name") -> str:
    """``name`` normalised (NFKC, single spaces), or ValueError saying why it cannot sign.

    Examples
    --------
    >>> check_printed_name("  Zoë   Łukasiewicz-Ng ")
    'Zoë Łukasiewicz-Ng'
    >>> check_printed_name("A\\u200bPreparer")
    Traceback (most recent call last):
    ...
    ValueError: printed name 'A\\u200bPreparer' holds an invisible or control character (U+200B); a printed name must show every character it holds
    >>> check_printed_name("A. Prep\\u0430rer")
    Traceback (most recent call last):
    ...
    ValueError: printed name 'A. Prepаrer' mixes letters of the CYRILLIC and LATIN scripts, which can look alike; write it in one script
    """
    if not isinstance(name, str):
        raise ValueError(f"{what} must be text; got {type(name).__name__}")
    for char in name:
        category = unicodedata.category(char)
        if category in ("Cc", "Cf", "Co", "Cs", "Cn", "Zl", "Zp") and char not in " \t":
            raise ValueError(f"{what} {name!r} holds an invisible or control character "
                             f"(U+{ord(char):04X}); a printed name must show every character "
                             "it holds")
    text = " ".join(unicodedata.normalize("NFKC", name).split())
    if not text or not any(unicodedata.category(c).startswith("L") for c in text):
        raise ValueError(f"{what} must contain letters; got {name!r}")
    if len(text) > _MAX_LENGTH:
        raise ValueError(f"{what} is longer than {_MAX_LENGTH} characters")
    scripts = sorted({s for s in map(_script, text) if s is not None})
    if len(scripts) > 1:
        raise ValueError(f"{what} {text!r} mixes letters of the {' and '.join(scripts)} scripts, "
                         "which can look alike; write it in one script")
    return text


def clean_name(name: object) -> str | None:
    """The normalised name, or None when :func:`check_printed_name` refuses it.

    Examples
    --------
    >>> clean_name("R.  Okafor"), clean_name("\\u200b")
    ('R. Okafor', None)
    """
    try:
        return check_printed_name(name)
    except ValueError:
        return None


def person_key(name: str) -> tuple[str, ...]:
    """The words of a name, accents and case removed, sorted: equal keys are one person.

    Examples
    --------
    >>> person_key("Preparer, A.") == person_key("A Preparer") == person_key("a. PREPARER")
    True
    >>> person_key("Tomasz Øvergaard")
    ('overgaard', 'tomasz')
    """
    text = unicodedata.normalize("NFKC", name).casefold()
    # Letters that do not decompose into base letter + accent.
    text = text.translate(str.maketrans({"ø": "o", "ł": "l", "đ": "d", "ħ": "h", "ß": "ss",
                                         "æ": "ae", "œ": "oe", "þ": "th", "ı": "i"}))
    decomposed = unicodedata.normalize("NFKD", text)
    words, current = [], []
    for char in decomposed:
        category = unicodedata.category(char)
        if category.startswith("M"):
            continue  # accents and other combining marks
        if category.startswith(("L", "N")):
            current.append(char)
        elif current:
            words.append("".join(current))
            current = []
    if current:
        words.append("".join(current))
    return tuple(sorted(words))


def same_person(a: str | None, b: str | None) -> bool:
    """Whether two printed names may name the same person.

    Equal :func:`person_key`, or the same number of words where each initial
    matches a word starting with it and every longer word matches exactly.

    Examples
    --------
    >>> same_person("A. Preparer", "Preparer, A.")
    True
    >>> same_person("A. Preparer", "Anna Preparer"), same_person("A. Preparer", "B. Preparer")
    (True, False)
    >>> same_person("R. Okafor", None)
    False
    """
    if not a or not b:
        return False
    ka, kb = person_key(a), person_key(b)
    if not ka or not kb:
        return False
    if ka == kb:
        return True
    if len(ka) != len(kb):
        return False
    longs_a = sorted(w for w in ka if len(w) > 1)
    longs_b = sorted(w for w in kb if len(w) > 1)
    # Every word that is not an initial on one side must appear on the other side, and
    # each initial must be the first letter of a remaining word.
    rest_a, rest_b = list(ka), list(kb)
    for word in set(longs_a) & set(longs_b):
        for _ in range(min(longs_a.count(word), longs_b.count(word))):
            rest_a.remove(word)
            rest_b.remove(word)
    if any(len(w) > 1 for w in rest_a) and any(len(w) > 1 for w in rest_b):
        return False
    initials = sorted(w[0] for w in rest_a)
    return initials == sorted(w[0] for w in rest_b)
