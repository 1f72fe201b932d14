"""A record revision's first signature certifies it, and each signature box locks itself and
the boxes before it: checked with pyHanko's own validation API (not our wrapper), against a
real WeasyPrint record and certificates made here with cryptography.

What the outcomes mean comes from ISO 32000-1 12.8.2.2 (DocMDP: with P = 2 only filling in
forms and signing are allowed after certification) and 12.8.2.4 (FieldMDP: a signature
field's /Lock names the fields its signature locks).
"""

from __future__ import annotations

import io

import pytest
from pyhanko.pdf_utils.reader import PdfFileReader
from pyhanko.sign.diff_analysis import ModificationLevel
from pyhanko.sign.fields import MDPPerm
from pyhanko.sign.validation import validate_pdf_signature
from pyhanko_certvalidator import ValidationContext

from tests.domain.test_signing import _make_ca, _make_signer
from tests.pdf_tamper import appended
from webapp.records import signing
from webapp.records.signing import StampBox, sign_record

BOXES = {"performer": StampBox(0, (50, 500, 250, 560)),
         "inspector": StampBox(0, (300, 500, 500, 560)),
         "certify": StampBox(0, (50, 400, 250, 460))}


@pytest.fixture(scope="module")
def ca():
    return _make_ca("Certification test CA")


@pytest.fixture(scope="module")
def certified(ca) -> bytes:
    from weasyprint import HTML
    pdf = HTML(string="<h1>Work record</h1><p>Plug torque 275 lbf·in.</p>").write_pdf()
    performer = _make_signer(ca, "Alex Performer", "AUTH-1001")
    return sign_record(pdf, performer, field_name="performer", meaning="Performed",
                       signer_name="Alex Performer", stamp="Performed", reserve=BOXES)


@pytest.fixture(scope="module")
def countersigned(ca, certified) -> bytes:
    inspector = _make_signer(ca, "Robin Inspector", "AUTH-1002")
    return sign_record(certified, inspector, field_name="inspector", meaning="Inspected",
                       signer_name="Robin Inspector", stamp="Inspected")


def _statuses(pdf: bytes, ca) -> list:
    """pyHanko's own verdict on each signature, oldest first, with the DocMDP level the
    signature declares."""
    def run():
        reader = PdfFileReader(io.BytesIO(pdf))
        context = ValidationContext(trust_roots=[signing._as_asn1(ca[1])],
                                    allow_fetching=False)
        return [(validate_pdf_signature(sig, context), sig.docmdp_level)
                for sig in reader.embedded_signatures]
    return signing._off_thread(run)


def test_the_first_signature_certifies_the_revision_for_form_filling_only(certified, ca):
    [(status, level)] = _statuses(certified, ca)
    assert status.intact and status.valid and status.trusted
    assert level == MDPPerm.FILL_FORMS          # P = 2
    reader = PdfFileReader(io.BytesIO(certified))
    assert "/DocMDP" in reader.root["/Perms"]                   # the catalog names it


def test_a_later_signature_in_a_reserved_box_is_allowed_form_filling(countersigned, ca):
    (first, _), (second, level) = _statuses(countersigned, ca)
    assert first.docmdp_ok is not False and second.docmdp_ok is not False
    assert first.modification_level == ModificationLevel.FORM_FILLING
    assert second.intact and second.valid and second.trusted
    assert level is None          # only the first signature certifies


@pytest.mark.parametrize("change", ["content", "annotation"])
def test_an_appended_change_is_a_forbidden_change_of_the_certified_record(countersigned, ca,
                                                                          change):
    altered = appended(countersigned, change)
    for status, _ in _statuses(altered, ca):
        assert status.intact and status.valid        # the signed bytes themselves are intact
        assert status.modification_level == ModificationLevel.OTHER
        assert status.docmdp_ok is False
    # and the station's own report agrees
    reports = signing.verify_record(altered, ca[1])
    assert all(r.modified_after for r in reports) and not signing.all_good(reports)


def test_each_box_locks_itself_and_the_boxes_before_it(countersigned):
    reader = PdfFileReader(io.BytesIO(countersigned))
    locks = {}
    for field in reader.root["/AcroForm"]["/Fields"]:
        field = field.get_object()
        lock = field.get("/Lock")
        locks[str(field["/T"])] = ([str(f) for f in lock.get_object()["/Fields"]]
                                   if lock is not None else None)
    assert locks == {"performer": ["performer"], "inspector": ["performer", "inspector"],
                     "certify": ["performer", "inspector", "certify"]}
    # A filled box carries its lock into the signature as a FieldMDP reference.
    [performer_sig, _] = reader.embedded_signatures
    methods = [str(ref.get_object()["/TransformMethod"])
               for ref in performer_sig.sig_object["/Reference"]]
    assert "/FieldMDP" in methods and "/DocMDP" in methods
