"""Ed25519 key pairs for signing a record: make, write, read, fingerprint.

A key pair belongs to one person. The private key file is PKCS#8 PEM (RFC 8410 for Ed25519)
with a short explanatory header naming its owner (RFC 7468 allows text before the PEM block);
it is written with mode 0600. The public key file ``PATH.pub`` holds the same name, the
fingerprint and the SubjectPublicKeyInfo PEM. The fingerprint is the SHA-256 of the 32 raw
public key bytes (RFC 8032 encoding), written ``SHA256:<64 hex digits>``.
"""

from __future__ import annotations

import hashlib
import os
import re
from dataclasses import dataclass
from pathlib import Path

from cryptography.exceptions import UnsupportedAlgorithm
from cryptography.hazmat.primitives import serialization
from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey, Ed25519PublicKey

from bringup.errors import InputError
from bringup.names import control_character

__all__ = [
    "KeyPair",
    "PublicKey",
    "fingerprint",
    "generate_key_pair",
    "key_id",
    "load_private_key",
    "load_public_key",
    "public_key_from_raw",
    "raw_public_bytes",
]

_NAME_RE = re.compile(r"^name: (.+)$", re.MULTILINE)


@dataclass(frozen=True)
class PublicKey:
    """A person's public key with the name written beside it."""

    name: str
    key: Ed25519PublicKey

    @property
    def raw(self) -> bytes:
        return raw_public_bytes(self.key)

    @property
    def fingerprint(self) -> str:
        return fingerprint(self.key)


@dataclass(frozen=True)
class KeyPair:
    """A private key, its public half and the owner's name."""

    name: str
    private: Ed25519PrivateKey

    @property
    def public(self) -> PublicKey:
        return PublicKey(self.name, self.private.public_key())


def raw_public_bytes(key: Ed25519PublicKey) -> bytes:
    """The 32-byte public key (RFC 8032 §5.1.5 encoding)."""
    return key.public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)


def public_key_from_raw(raw: bytes) -> Ed25519PublicKey:
    """Rebuild a public key from its 32 raw bytes; ValueError when they are not a key."""
    return Ed25519PublicKey.from_public_bytes(raw)


def fingerprint(key: Ed25519PublicKey) -> str:
    """``SHA256:<hex>`` of the raw public key bytes."""
    return "SHA256:" + hashlib.sha256(raw_public_bytes(key)).hexdigest()


_FINGERPRINT_RE = re.compile(r"^SHA256:([0-9a-f]{64})$")


def key_id(fingerprint_text: str) -> str:
    """The key as people compare it on screen and paper: the first 80 bits of the fingerprint's
    SHA-256 as five groups of four hex digits (``abbc-915c-7f18-8554-2d5f``). 80 bits keep a
    deliberate look-alike out of reach for this use, and the full digest stays in the public
    key file and in every signature. Text that is not a fingerprint is returned as it is."""
    match = _FINGERPRINT_RE.match(fingerprint_text or "")
    if match is None:
        return fingerprint_text
    hex_digits = match.group(1)
    return "-".join(hex_digits[i : i + 4] for i in range(0, 20, 4))


def _check_name(name: str) -> str:
    clean = name.strip()
    if not clean or "\n" in clean or "\r" in clean:
        raise InputError(f"--name: a key needs a one-line, non-empty name, got {name!r}")
    bad = control_character(clean)
    if bad is not None:
        raise InputError(
            f"--name {clean!r}: contains the control character {bad} (one line of text)"
        )
    return clean


def _check_target(path: Path, pub_path: Path) -> None:
    """Refuse a key path that cannot take a new key: one line naming the path and why."""
    for target in (path, pub_path):
        if target.is_dir():
            raise InputError(f"--out {target}: is a directory; give a file name for the key")
        if target.exists() or target.is_symlink():
            raise InputError(f"--out {target}: already exists; a key is never overwritten")
    parent = path.parent
    if parent.exists() and not parent.is_dir():
        raise InputError(f"--out {path}: {parent} is not a directory")
    if not parent.is_dir():
        raise InputError(f"--out {path}: no such directory {parent} for the key")


def _write_new(path: Path, data: bytes, mode: int) -> None:
    """Write ``data`` to a new file at ``path`` with ``mode``; refuses an existing file.

    O_EXCL refuses a file that appeared since the check; the mode is set at creation, not by
    a chmod after the key bytes are already on disk.
    """
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, mode)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
    except BaseException:
        path.unlink(missing_ok=True)  # a half-written key file is no key
        raise


def generate_key_pair(name: str, path: Path) -> KeyPair:
    """Make a key pair for ``name``: private key at ``path`` (mode 0600), public at ``path.pub``.

    Refuses to overwrite either file. Any failure to write (a directory given, a read-only
    file system, no permission, a full disk) is one ``InputError`` line naming the path, and
    leaves neither file behind.
    """
    name = _check_name(name)
    path = Path(path)
    pub_path = path.with_name(path.name + ".pub")
    private = Ed25519PrivateKey.generate()
    pair = KeyPair(name, private)
    pem = private.private_bytes(
        serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8, serialization.NoEncryption()
    )
    header = f"bringup signing key (keep private)\nname: {name}\n".encode()
    pub_pem = private.public_key().public_bytes(
        serialization.Encoding.PEM, serialization.PublicFormat.SubjectPublicKeyInfo
    )
    pub_header = (
        f"bringup public key\nname: {name}\nfingerprint: {pair.public.fingerprint}\n".encode()
    )
    target = path
    try:
        _check_target(path, pub_path)
        _write_new(path, header + pem, 0o600)
        target = pub_path
        try:
            _write_new(pub_path, pub_header + pub_pem, 0o644)
        except BaseException:
            path.unlink(missing_ok=True)  # a private key without its public half is no use
            raise
    except FileExistsError:
        raise InputError(f"--out {target}: already exists; a key is never overwritten") from None
    except IsADirectoryError:
        raise InputError(f"--out {target}: is a directory; give a file name for the key") from None
    except OSError as exc:
        why = exc.strerror or str(exc)
        raise InputError(f"--out {target}: cannot write the key ({why})") from None
    return pair


def _read(path: Path, what: str) -> bytes:
    try:
        return Path(path).read_bytes()
    except FileNotFoundError:
        raise InputError(f"{path}: no such {what} file") from None
    except OSError as exc:
        raise InputError(f"{path}: cannot read the {what} file ({exc.strerror})") from None


def _name_in(data: bytes, path: Path) -> str:
    head = data.split(b"-----BEGIN", 1)[0].decode("utf-8", errors="replace")
    match = _NAME_RE.search(head)
    if not match:
        raise InputError(f"{path}: no 'name:' line before the key")
    name = match.group(1).strip()
    bad = control_character(name)
    if bad is not None:
        # A name that displays in another order than it is stored (U+202E) would sign as
        # someone else on screen: the key file is refused, not shown.
        raise InputError(f"{path}: the key's name {name!r} contains the control character {bad}")
    return name


def load_private_key(path: Path) -> KeyPair:
    """Read a private key file written by ``generate_key_pair``."""
    path = Path(path)
    data = _read(path, "private key")
    name = _name_in(data, path)
    try:
        key = serialization.load_pem_private_key(data, password=None)
    except (ValueError, TypeError, UnsupportedAlgorithm):
        raise InputError(f"{path}: not an unencrypted PEM private key") from None
    if not isinstance(key, Ed25519PrivateKey):
        raise InputError(f"{path}: the key is not an Ed25519 key")
    return KeyPair(name, key)


def load_public_key(path: Path) -> PublicKey:
    """Read a public key file (``*.pub``) written by ``generate_key_pair``."""
    path = Path(path)
    data = _read(path, "public key")
    name = _name_in(data, path)
    try:
        key = serialization.load_pem_public_key(data)
    except (ValueError, UnsupportedAlgorithm):
        raise InputError(f"{path}: not a PEM public key") from None
    if not isinstance(key, Ed25519PublicKey):
        raise InputError(f"{path}: the key is not an Ed25519 key")
    return PublicKey(name, key)
