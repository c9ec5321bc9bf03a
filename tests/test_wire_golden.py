"""Golden vectors of the board protocol, checked under CPython and under MicroPython.

The same file (tests/golden/wire_vectors.json) and the same checker script run under both
interpreters. External anchors: the CRC RevEng catalogue check value of
CRC-16/IBM-3740 (alias CCITT-FALSE) and RFC 4231 test case 2 for HMAC-SHA256; every frame
CRC and the signature are also recomputed with CPython's own binascii/hmac (independent
implementations, used only here).
"""

import binascii
import copy
import hashlib
import hmac
import importlib.util
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from nullsteer.protocol import wire
from nullsteer.sim import find_micropython

GOLDEN = Path(__file__).parent / "golden"
VECTORS = json.loads((GOLDEN / "wire_vectors.json").read_text())


def _checker():
    sys.modules.setdefault("wire", wire)
    spec = importlib.util.spec_from_file_location("check_wire_vectors",
                                                  GOLDEN / "check_wire_vectors.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_vectors_under_cpython():
    n, failures = _checker().run(VECTORS)
    assert failures == []
    assert n > 70


def test_vectors_under_micropython():
    env = dict(os.environ, MICROPYPATH=".frozen:" + str(Path(wire.__file__).parent))
    out = subprocess.run([str(find_micropython()), str(GOLDEN / "check_wire_vectors.py"),
                          str(GOLDEN / "wire_vectors.json")], capture_output=True, text=True,
                         env=env, timeout=60)
    assert out.returncode == 0, out.stdout + out.stderr
    n_cpython, _ = _checker().run(VECTORS)
    assert out.stdout.strip().splitlines()[-1] == "checked %d failed 0" % n_cpython


def test_checker_detects_a_changed_byte():
    # A checker that cannot fail proves nothing: flip one digit of a pinned frame.
    broken = copy.deepcopy(VECTORS)
    line = broken["encode"][3]["line"]
    broken["encode"][3]["line"] = line.replace("mask=37", "mask=38")
    _, failures = _checker().run(broken)
    assert failures


def test_crc_catalogue_check_value():
    # CRC RevEng catalogue, CRC-16/IBM-3740 (alias CRC-16/CCITT-FALSE): check = 0x29B1
    # for the ASCII string "123456789".
    assert wire.crc16_ccitt_false(b"123456789") == 0x29B1
    assert VECTORS["crc"][0]["crc"] == "29B1"


def _all_lines():
    for group in ("encode", "encode_error", "signed"):
        for case in VECTORS[group]:
            yield case["line"]


def test_frame_crcs_with_an_independent_implementation():
    # CPython binascii.crc_hqx is the CRC-CCITT (polynomial 0x1021, MSB first, no final
    # XOR); with init 0xFFFF it is CRC-16/CCITT-FALSE (CPython library documentation).
    lines = list(_all_lines())
    assert len(lines) >= 15
    for line in lines:
        body, check = line.rstrip("\n").rsplit(" *", 1)
        assert int(check, 16) == binascii.crc_hqx(body.encode(), 0xFFFF), line


def test_hmac_rfc4231_case2_and_stdlib():
    # RFC 4231 section 4.3 (test case 2): key "Jefe", data "what do ya want for nothing?".
    case = VECTORS["hmac_sha256"][0]
    key = bytes.fromhex(case["key_hex"])
    assert key == b"Jefe"
    want = "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"
    assert case["mac_hex"] == want
    assert wire.hmac_sha256(key, case["data"].encode()).hex() == want
    assert hmac.new(key, case["data"].encode(), hashlib.sha256).hexdigest() == want


@pytest.mark.parametrize("case", VECTORS["signed"], ids=lambda c: c["verb"])
def test_signed_vector_with_stdlib_hmac(case):
    # HMAC-SHA256 (RFC 2104) recomputed with CPython's hmac module over every byte before
    # " sig=", the frame counter being the field just before the signature
    line = case["line"].rstrip("\n")
    body, rest = line.split(" sig=")
    sig = rest.split(" *")[0]
    key = bytes.fromhex(case["key_hex"])
    assert hmac.new(key, body.encode(), hashlib.sha256).hexdigest() == sig
    assert body.endswith(" ctr=%d" % case["ctr"])


@pytest.mark.parametrize("case", VECTORS["request_errors"], ids=lambda c: c["name"])
def test_every_error_vector_is_rejected(case):
    # Each malformed request is refused with the pinned error code (protocol rule: a frame
    # that fails any check is answered with ERR, never acted on).
    line = bytes.fromhex(case["line_hex"]) if "line_hex" in case else case["line"].encode()
    with pytest.raises(wire.WireError) as info:
        wire.decode_request(line)
    assert info.value.code == case["code"]
