"""The station's certificate authority, for the shop's IT person: what a tablet must trust."""

from __future__ import annotations

from typing import Any

from cryptography.hazmat.primitives import serialization
from cryptography.x509.oid import NameOID
from flask import Blueprint, Response, render_template, request

from ..records.revocation import LIST_PATH
from ..records.server_identity import certificate_fingerprint
from ..station.authority import current_revocation_list
from .common import authority, db, now, public

bp = Blueprint("station", __name__)

CA_FILENAME = "sparkward-station-ca"


@bp.get("/station-ca")
@public
def authority_page() -> Any:
    """How to make a tablet trust the station, with the fingerprint to compare on it."""
    cert = authority().cert
    names = cert.subject.get_attributes_for_oid(NameOID.COMMON_NAME)
    return render_template("station/ca.html", authority_name=names[0].value if names else "",
                           fingerprint=certificate_fingerprint(cert),
                           valid_until=cert.not_valid_after_utc, secure=request.is_secure)


@bp.get("/station-ca.pem")
@public
def authority_certificate() -> Any:
    """The authority's certificate only (public by nature); its key never leaves the station."""
    pem = authority().cert.public_bytes(serialization.Encoding.PEM)
    return _certificate_file(pem, "application/x-pem-file", "pem")


@bp.get("/station-ca.crt")
@public
def authority_certificate_der() -> Any:
    """The same certificate in DER, the form some tablets' certificate installers expect."""
    der = authority().cert.public_bytes(serialization.Encoding.DER)
    return _certificate_file(der, "application/x-x509-ca-cert", "crt")


@bp.get(LIST_PATH)
@public
def revocation_list() -> Any:
    """The station's certificate revocation list as of now (RFC 5280, DER), made from the
    database: the distribution point every person certificate names."""
    crl = current_revocation_list(db(), authority(), now())
    return Response(crl.public_bytes(serialization.Encoding.DER),
                    mimetype="application/pkix-crl", headers={"Cache-Control": "no-cache"})


def _certificate_file(data: bytes, mimetype: str, extension: str) -> Response:
    return Response(data, mimetype=mimetype, headers={
        "Content-Disposition": f'attachment; filename="{CA_FILENAME}.{extension}"',
        "Cache-Control": "no-cache"})
