"""Who may sign what: the authorisation that covers a signature, and the terms of a grant."""

from __future__ import annotations

from datetime import date

import pytest

from webapp.domain.authorisations import Authorisation, authorisation_for, check_grant
from webapp.domain.errors import RuleRefusal
from webapp.domain.readings import InputProblem

TODAY = date(2026, 12, 1)


def held(signatures=("perform",), scope=("74",), expires_on=date(2027, 12, 31),
         revoked_at=None, id=1, number="DEMO-CA-1") -> Authorisation:
    return Authorisation(id=id, person_id=7, signatures=tuple(signatures), scope=tuple(scope),
                         licence_kind="Company authorisation (demo)", licence_number=number,
                         expires_on=expires_on, revoked_at=revoked_at)


@pytest.mark.parametrize(("role", "signatures"), [
    ("performer", ("perform",)), ("inspector", ("inspect",)), ("certifying", ("certify",))])
def test_each_role_needs_its_own_kind_of_signature(role, signatures):
    found = authorisation_for([held(signatures)], role, "74-10", "removal", TODAY)
    assert found.licence_number == "DEMO-CA-1"
    other = next(r for r in ("performer", "inspector", "certifying") if r != role)
    with pytest.raises(RuleRefusal) as refused:
        authorisation_for([held(signatures)], other, "74-10", "removal", TODAY)
    assert refused.value.rule == "authorisation_missing"


@pytest.mark.parametrize(("scope", "covered"), [
    (("74",), True),                 # the chapter covers each of its sections
    (("74-10",), True),              # the section itself
    (("74-20",), False),             # another section of the chapter
    (("removal",), True),            # the procedure's kind
    (("installation",), False),
    (("74-20", "removal"), True),    # any item of the scope
    (("7",), False), (("74-1",), False),
])
def test_the_scope_is_an_ata_chapter_or_section_or_a_kind_of_procedure(scope, covered):
    if covered:
        assert authorisation_for([held(scope=scope)], "performer", "74-10", "removal", TODAY)
    else:
        with pytest.raises(RuleRefusal) as refused:
            authorisation_for([held(scope=scope)], "performer", "74-10", "removal", TODAY)
        assert refused.value.rule == "authorisation_missing"
        assert refused.value.reason.startswith(
            "No authorisation of yours covers performing ATA 74-10 (removal)")


def test_an_authorisation_is_valid_through_its_last_day_and_then_says_it_expired():
    last_day = date(2026, 1, 31)
    assert authorisation_for([held(("certify",), expires_on=last_day)], "certifying", "74-00",
                             "functional check", last_day)
    with pytest.raises(RuleRefusal) as refused:
        authorisation_for([held(("certify",), expires_on=last_day)], "certifying", "74-00",
                          "functional check", date(2026, 2, 1))
    assert refused.value.rule == "authorisation_expired"
    assert refused.value.reason.startswith("No authorisation of yours covers certifying "
                                           "ATA 74-00 (functional check) (expired 2026-01-31)")
    assert refused.value.details == {"expired_on": "2026-01-31"}


def test_a_revoked_authorisation_covers_nothing():
    with pytest.raises(RuleRefusal) as refused:
        authorisation_for([held(revoked_at="2026-11-20T10:00:00+00:00")], "performer", "74-10",
                          "removal", TODAY)
    assert refused.value.rule == "authorisation_revoked"
    assert "(revoked 2026-11-20)" in refused.value.reason


def test_an_expired_one_is_told_before_a_revoked_one_and_a_valid_one_wins():
    expired = held(expires_on=date(2026, 6, 30), id=1, number="OLD")
    revoked = held(revoked_at="2026-11-20T10:00:00+00:00", id=2, number="GONE")
    with pytest.raises(RuleRefusal) as refused:
        authorisation_for([expired, revoked], "performer", "74-10", "removal", TODAY)
    assert refused.value.rule == "authorisation_expired"
    valid = held(id=3, number="NEW")
    assert authorisation_for([expired, revoked, valid], "performer", "74-10", "removal",
                             TODAY).licence_number == "NEW"


def test_of_several_valid_ones_the_one_valid_longest_is_used():
    short = held(expires_on=date(2027, 1, 31), id=5, number="SHORT")
    long = held(expires_on=date(2028, 1, 31), id=4, number="LONG")
    assert authorisation_for([short, long], "performer", "74-10", "removal",
                             TODAY).licence_number == "LONG"


def test_no_authorisation_at_all_says_who_signs_instead():
    with pytest.raises(RuleRefusal) as refused:
        authorisation_for([], "inspector", "74-20", "inspection", TODAY)
    assert refused.value.reason == ("No authorisation of yours covers inspecting ATA 74-20 "
                                    "(inspection): another person holding one signs here, or "
                                    "ask the station's admin.")


GOOD = {"signatures": "perform, Inspect,perform", "scope": "74, 74-10,Functional  check",
        "licence_kind": "  Company authorisation (demo)  ", "licence_number": "DEMO-1",
        "expires_on": "2027-12-31"}


def test_a_grant_is_read_from_comma_separated_text_and_tidied():
    terms = check_grant(**GOOD, today=TODAY)
    assert terms.signatures == ("perform", "inspect")
    assert terms.scope == ("74", "74-10", "functional check")
    assert terms.licence_kind == "Company authorisation (demo)"
    assert terms.expires_on == date(2027, 12, 31)
    assert check_grant(**{**GOOD, "signatures": ["certify"], "scope": ["74-20"]},
                       today=TODAY).signatures == ("certify",)


def test_a_grant_may_end_today_but_not_before():
    assert check_grant(**{**GOOD, "expires_on": TODAY.isoformat()}, today=TODAY)
    with pytest.raises(InputProblem) as wrong:
        check_grant(**{**GOOD, "expires_on": "2026-11-30"}, today=TODAY)
    assert wrong.value.field == "expires_on" and "already past" in wrong.value.message


@pytest.mark.parametrize(("field", "value", "words"), [
    ("signatures", "", "at least one"),
    ("signatures", [], "at least one"),
    ("signatures", "perform,release", "'release' is not a kind of signature"),
    ("scope", " , ", "Give the scope"),
    ("scope", "74-1", "'74-1' is neither"),
    ("scope", "engine", "'engine' is neither"),
    ("licence_kind", "   ", "Give the kind of licence"),
    ("licence_number", "", "Give the licence or authorisation number"),
    ("licence_number", "N" * 81, "80 characters"),
    ("expires_on", "31/12/2027", "YYYY-MM-DD"),
    ("expires_on", "", "YYYY-MM-DD"),
])
def test_a_bad_grant_names_its_field(field, value, words):
    with pytest.raises(InputProblem) as wrong:
        check_grant(**{**GOOD, field: value}, today=TODAY)
    assert wrong.value.field == field
    assert words in wrong.value.message
