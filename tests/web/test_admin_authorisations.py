"""The admin lists, grants and revokes what a person may sign; bad input stores nothing."""

from __future__ import annotations

import pytest

from webapp.store import authorisations, people

GOOD = {"signatures": ["perform", "inspect"], "scope": "74-10, removal",
        "licence_kind": "Company authorisation (demo) — mechanic",
        "licence_number": "BCA-CA-0199", "expires_on": "2027-06-30"}   # invented


@pytest.fixture
def admin(login):
    return login("admin")


@pytest.fixture
def mech1(db):
    return people.person_by_username(db, "mech1")


def _page(mech1):
    return f"/people/{mech1.id}/authorisations"


def test_the_people_page_leads_to_each_person_s_authorisations(admin, mech1):
    html = admin.get("/people").get_data(as_text=True)
    assert f'href="{_page(mech1)}" data-testid="authorisations-mech1"' in html
    page = admin.get(_page(mech1)).get_data(as_text=True)
    assert "BCA-CA-0147" in page and "Company authorisation (demo) — mechanic" in page
    assert "2027-12-31" in page and "✓</span> valid" in page


def test_the_admin_grants_an_authorisation(admin, mech1, db):
    answer = admin.post_form(_page(mech1), GOOD)
    assert answer.status_code == 303 and answer.headers["Location"].endswith(_page(mech1))
    held = authorisations.held_by(db, mech1.id)
    newest = held[0]
    assert (newest.signatures, newest.scope) == (("perform", "inspect"), ("74-10", "removal"))
    assert newest.licence_number == "BCA-CA-0199" and newest.expires_on.isoformat() == \
        "2027-06-30"
    assert newest.granted_by == people.person_by_username(db, "admin").id
    page = admin.get(_page(mech1)).get_data(as_text=True)
    assert "BCA-CA-0199" in page and "by Dana Whitcombe" in page


@pytest.mark.parametrize(("field", "value"), [
    ("signatures", []), ("signatures", ["release"]), ("scope", ""), ("scope", "engine"),
    ("licence_kind", " "), ("licence_number", ""), ("expires_on", "30/06/2027"),
    ("expires_on", "2026-11-30"),               # before the station's day (2026-12-01)
])
def test_bad_input_is_answered_422_naming_the_field_and_nothing_is_stored(admin, mech1, db,
                                                                          field, value):
    before = db["authorisations"].count
    answer = admin.post_form(_page(mech1), {**GOOD, field: value})
    assert answer.status_code == 422
    html = answer.get_data(as_text=True)
    assert f'data-testid="field-error-{field}"' in html
    assert 'data-testid="grant-problem"' in html
    assert db["authorisations"].count == before
    if field != "licence_number":
        assert 'value="BCA-CA-0199"' in html       # what was typed is kept


def test_a_grant_without_the_csrf_token_is_refused(admin, mech1, db):
    before = db["authorisations"].count
    answer = admin.client.post(_page(mech1), data=GOOD)
    assert answer.status_code == 400
    assert db["authorisations"].count == before


def test_the_admin_revokes_an_authorisation_and_it_stays_listed(admin, mech1, db):
    held = authorisations.held_by(db, mech1.id)[0]
    answer = admin.post_form(f"{_page(mech1)}/{held.id}/revoke", {})
    assert answer.status_code == 303
    assert authorisations.held_by(db, mech1.id) == []
    kept = authorisations.held_by(db, mech1.id, include_revoked=True)
    assert [a.id for a in kept] == [held.id] and kept[0].revoked_at is not None
    page = admin.get(_page(mech1)).get_data(as_text=True)
    assert "BCA-CA-0147" in page and "revoked 2026-12-01" in page
    assert f'data-testid="revoke-authorisation-{held.id}"' not in page


def test_an_authorisation_is_revoked_only_under_its_own_person(admin, mech1, db):
    theirs = authorisations.held_by(db, people.person_by_username(db, "mech2").id)[0]
    answer = admin.post_form(f"{_page(mech1)}/{theirs.id}/revoke", {})
    assert answer.status_code == 404
    assert authorisations.authorisation(db, theirs.id).revoked_at is None


def test_only_the_admin_sees_and_grants_authorisations(login, mech1, db):
    mechanic = login("mech1")
    assert mechanic.get(_page(mech1)).status_code == 403
    before = db["authorisations"].count
    assert mechanic.post_form(_page(mech1), GOOD).status_code == 403
    assert login("super").post_form(_page(mech1), GOOD).status_code == 403
    assert db["authorisations"].count == before


def test_an_unknown_person_has_no_authorisations_page(admin):
    assert admin.get("/people/999/authorisations").status_code == 404
