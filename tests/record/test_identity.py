"""Printed names: what is refused, and which variants are the same person.

Sources: Unicode Standard Annex #15 (NFKC folds compatibility forms such as the ligature ﬁ and
full-width letters), Unicode Technical Standard #39 §5 (mixed-script text as a spoofing sign;
U+0430 CYRILLIC SMALL LETTER A looks like U+0061), the general categories Cc/Cf of the Unicode
Character Database (U+200B ZERO WIDTH SPACE and U+202E RIGHT-TO-LEFT OVERRIDE are Cf).
"""

from __future__ import annotations

import pytest

from calib.record.identity import check_printed_name, person_key, same_person


@pytest.mark.parametrize("name, shown", [
    ("  Zoë   Łukasiewicz-Ng ", "Zoë Łukasiewicz-Ng"),
    ("Tomasz Øvergaard", "Tomasz Øvergaard"),
    ("Ａ. Preparer", "A. Preparer"),            # full-width A folded by NFKC (UAX #15)
    ("鈴木 花子", "鈴木 花子"),                    # one writing system: accepted
    ("R. Okafor (demo analyst)", "R. Okafor (demo analyst)"),
])
def test_usable_names_are_normalised(name, shown):
    assert check_printed_name(name) == shown


@pytest.mark.parametrize("name, message", [
    ("\u200b", "printed name '\\u200b' holds an invisible or control character (U+200B); a "
               "printed name must show every character it holds"),
    ("A Prep\u200barer", "printed name 'A Prep\\u200barer' holds an invisible or control "
                         "character (U+200B); a printed name must show every character it holds"),
    ("A Preparer\u202e", "printed name 'A Preparer\\u202e' holds an invisible or control "
                         "character (U+202E); a printed name must show every character it holds"),
    ("A\nPreparer", "printed name 'A\\nPreparer' holds an invisible or control character "
                    "(U+000A); a printed name must show every character it holds"),
    ("A Prep\u0430rer", "printed name 'A Prepаrer' mixes letters of the CYRILLIC and LATIN "
                        "scripts, which can look alike; write it in one script"),
    ("\u0410. Preparer", "printed name 'А. Preparer' mixes letters of the CYRILLIC and LATIN "
                         "scripts, which can look alike; write it in one script"),
    ("   ", "printed name must contain letters; got '   '"),
    ("1234", "printed name must contain letters; got '1234'"),
])
def test_names_that_hide_what_they_say_are_refused(name, message):
    with pytest.raises(ValueError) as info:
        check_printed_name(name)
    assert str(info.value) == message


@pytest.mark.parametrize("variant", [
    "A Preparer", "Preparer, A.", "a. preparer", "A.  PREPARER", "Preparer A", "Anna Preparer",
    "A. Préparer",
])
def test_punctuation_order_case_accent_and_initial_variants_are_one_person(variant):
    # Common practice in separation-of-duties checks: when in doubt, treat as the same person.
    assert same_person("A. Preparer", variant)
    assert same_person(variant, "A. Preparer")


@pytest.mark.parametrize("other", ["B. Preparer", "Anna Preparer-Smith", "A. Reviewer",
                                   "Anna Preparer Jones", None, ""])
def test_different_people_stay_different(other):
    assert not same_person("A. Preparer", other)


def test_person_key_folds_letters_without_decomposition():
    # Ø and Ł have no canonical decomposition (UnicodeData.txt), so they are mapped by hand.
    assert person_key("Tomasz Øvergaard") == person_key("tomasz overgaard")
    assert person_key("Zoë Łukasiewicz-Ng") == ("lukasiewicz", "ng", "zoe")
