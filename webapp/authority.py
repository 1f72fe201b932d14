"""The station's certificate authority: made at `init`, kept protected in the instance folder.

Its key is encrypted under a passphrase kept beside the database (mode 0600), so a
copied database alone holds no usable key; people's keys are sealed under their PINs.
"""

from __future__ import annotations

import secrets
import threading
from datetime import datetime
from pathlib import Path

from .records.identity import StationAuthority, create_authority, load_authority, save_authority

_CACHE: dict[str, StationAuthority] = {}
_LOCK = threading.Lock()


def authority_folder(db_path: str | Path) -> Path:
    path = Path(db_path)
    return path.with_name(path.name + ".authority")


def _passphrase(folder: Path) -> bytes:
    secret = folder / "passphrase"
    if not secret.is_file():
        folder.mkdir(parents=True, exist_ok=True)
        folder.chmod(0o700)
        secret.write_text(secrets.token_urlsafe(32))
        secret.chmod(0o600)
    return secret.read_text().strip().encode()


def station_authority(db_path: str | Path, station_name: str, now: datetime) -> StationAuthority:
    """The station's CA, created on first use; loaded once per process."""
    folder = authority_folder(db_path)
    key = str(folder.resolve())
    with _LOCK:
        if key in _CACHE:
            return _CACHE[key]
        passphrase = _passphrase(folder)
        if (folder / "authority-cert.pem").is_file():
            authority = load_authority(folder, passphrase)
        else:
            authority = create_authority(station_name, now)
            save_authority(authority, folder, passphrase)
        _CACHE[key] = authority
        return authority
