"""HMAC-SHA256 of the codec with keys longer than the 64-byte block, under both interpreters.

RFC 4231 §4.7 (test case 6) and §4.8 (test case 7): a 131-byte key of 0xaa, which RFC 2104
§2 says must first be hashed to 32 bytes. A codec that truncated or zero-padded such a key
would still pass the short-key test case 2 of the golden vectors. The published MACs are
also recomputed with CPython's hmac module (an independent implementation).
"""

import binascii
import hashlib
import hmac
import os
import subprocess
from pathlib import Path

import pytest

from nullsteer.protocol import wire
from nullsteer.sim import find_micropython

KEY = b"\xaa" * 131
CASES = [
    ("RFC 4231 test case 6", b"Test Using Larger Than Block-Size Key - Hash Key First",
     "60e431591ee0b67f0d8a26aacbf5b77f8e0bc6213728c5140546040f0ee37f54"),
    ("RFC 4231 test case 7",
     b"This is a test using a larger than block-size key and a larger than block-size "
     b"data. The key needs to be hashed before being used by the HMAC algorithm.",
     "9b09ffa71b942fcb27635fbcd5b0e944bfdc63644f0713938a7f51535c3a35e2"),
]

#: run by the MicroPython unix port: the codec file itself, the same cases
_MP_SCRIPT = """
import binascii, wire
key = b"\\xaa" * 131
for data in %r:
    print(binascii.hexlify(wire.hmac_sha256(key, data)).decode())
"""


@pytest.mark.parametrize("name, data, mac", CASES, ids=[c[0] for c in CASES])
def test_long_key_cases_under_cpython(name, data, mac):
    assert hmac.new(KEY, data, hashlib.sha256).hexdigest() == mac, name   # the RFC itself
    assert binascii.hexlify(wire.hmac_sha256(KEY, data)).decode() == mac, name


def test_long_key_cases_under_micropython():
    env = dict(os.environ, MICROPYPATH=".frozen:" + str(Path(wire.__file__).parent))
    script = _MP_SCRIPT % ([c[1] for c in CASES],)
    out = subprocess.run([str(find_micropython()), "-c", script], capture_output=True,
                         text=True, env=env, timeout=60)
    assert out.returncode == 0, out.stdout + out.stderr
    assert out.stdout.split() == [c[2] for c in CASES]


def test_signed_frame_with_a_long_key_verifies_with_stdlib():
    # A frame signed with a 131-byte key: its sig= is HMAC-SHA256 over the bytes before
    # " sig=" (the codec's documented rule), checked with CPython's hmac.
    line = wire.sign(7, "SET", [("mask", 5)], KEY, 1_700_000_000)
    text = line.decode().strip()
    body, _, rest = text.partition(" sig=")
    assert hmac.new(KEY, body.encode(), hashlib.sha256).hexdigest() == rest[:64]
    assert wire.verify(line, KEY) == 1_700_000_000
