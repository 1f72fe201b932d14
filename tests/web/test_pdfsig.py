"""The station's signed record in poppler's pdfsig, a validator that is not ours: with the
station CA trusted through an NSS database made here, every signature of an untouched
record is "Signature is Valid" and its certificate trusted.

Skipped where pdfsig or NSS's certutil is not installed (run.sh installs both on Debian:
poppler-utils, libnss3-tools)."""

from __future__ import annotations

import shutil
import subprocess

import pytest

from tests.conftest import DEMO_PINS
from tests.web.jobs import Job, _event
from webapp.station.authority import authority_folder
from webapp.store import signers

pytestmark = pytest.mark.skipif(not (shutil.which("pdfsig") and shutil.which("certutil")),
                                reason="poppler-utils and libnss3-tools are not installed")


@pytest.fixture
def nss_trusting_the_station(db_path, tmp_path):
    ca_pem = authority_folder(db_path) / "authority-cert.pem"
    assert ca_pem.is_file()
    nss = tmp_path / "nss"
    nss.mkdir()
    subprocess.run(["certutil", "-N", "--empty-password", "-d", f"sql:{nss}"], check=True,
                   capture_output=True)
    subprocess.run(["certutil", "-A", "-n", "station CA", "-t", "CT,C,C", "-i", str(ca_pem),
                    "-d", f"sql:{nss}"], check=True, capture_output=True)
    return f"sql:{nss}"


def _pdfsig(path, nss: str) -> str:
    return subprocess.run(["pdfsig", "-nssdir", nss, str(path)], capture_output=True,
                          text=True, timeout=60).stdout


@pytest.fixture
def countersigned(mechanic, login, db, clock, tmp_path):
    job = Job(mechanic, db, clock, "exciter-removal")
    job.walk_to("performer")
    job.ok(_event("performer", "signed", pin=DEMO_PINS["mech1"]))
    job.walk_to("inspector")
    job.ok(_event("inspector", "signed", pin=DEMO_PINS["mech2"]), client=login("mech2"))
    path = tmp_path / "record.pdf"
    path.write_bytes(signers.latest_record(db, job.id)["pdf"])
    return path


def test_every_signature_of_an_untouched_record_is_valid_and_trusted_in_pdfsig(
        countersigned, nss_trusting_the_station):
    said = _pdfsig(countersigned, nss_trusting_the_station)
    assert said.count("Signature Validation: Signature is Valid.") == 2, said
    assert said.count("Certificate Validation: Certificate is Trusted.") == 2, said
    # Each signature is followed by its long-term validation data and a document
    # time-stamp (PAdES B-LT/LTA), so none covers the file to its end; pdfsig lists the
    # time-stamps but does not verify them, and does not analyse later revisions: pyHanko's
    # diff analysis (tests/domain/test_certification.py) tells such updates from a
    # forbidden change.
    assert "Test station time-stamp unit" in said
