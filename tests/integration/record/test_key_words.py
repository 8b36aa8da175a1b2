"""What ``bringup keygen`` and ``bringup sign`` say: in this project's own words, with the key
shown by a key id of our own (issue 13, "Own words")."""

from __future__ import annotations

import hashlib
import re
from pathlib import Path

import pytest

from bringup.cli import main
from bringup.record.keys import key_id, load_public_key, raw_public_bytes


def test_keygen_says_what_it_made_in_its_own_words(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    key = tmp_path / "ana.key"
    assert main(["keygen", "--name", "A. Novak", "--out", str(key)]) == 0
    out = capsys.readouterr().out
    # the layout of a general-purpose key tool's report is not ours: no "private key: ..."
    # / "public key: ..." / "fingerprint: SHA256:..." lines
    for borrowed in ("private key:", "public key:", "fingerprint:", "SHA256:"):
        assert borrowed not in out, out
    assert "A. Novak" in out and str(key) in out and f"{key}.pub" in out
    public = load_public_key(Path(f"{key}.pub"))
    digest = hashlib.sha256(raw_public_bytes(public.key)).hexdigest()
    # key id: the first 80 bits of the SHA-256 of the raw public key, in five groups of four
    # hex digits (our own form; the full digest stays in the public key file and the record)
    expected = "-".join(digest[i : i + 4] for i in range(0, 20, 4))
    assert key_id(public.fingerprint) == expected
    assert f"key id {expected}" in out, out


def test_key_id_of_a_fingerprint_that_is_not_one() -> None:
    assert key_id("not a fingerprint") == "not a fingerprint"
    assert re.fullmatch(r"([0-9a-f]{4}-){4}[0-9a-f]{4}", key_id("SHA256:" + "ab" * 32))
