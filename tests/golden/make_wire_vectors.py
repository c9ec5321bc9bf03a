"""Write wire_vectors.json from the codec (run by hand; review the diff before keeping it).

The vectors pin the bytes of the board protocol so that the host (CPython) and the board
(MicroPython) are checked against the same file. Regenerating them is a protocol change:
it must come with a reason. The external anchors (CRC catalogue check value, RFC 4231)
are written literally below, not computed.

    .venv/bin/python tests/golden/make_wire_vectors.py
"""

import json
from pathlib import Path

from nullsteer.protocol import wire

HERE = Path(__file__).parent

ENCODE = [
    (1, "PING", []),
    (2, "INFO", []),
    (3, "STATUS", []),
    (17, "SET", [["end", "A"], ["mask", 37], ["open", 0]]),
    (18, "SET", [["end", "B"], ["ohms", "900.0"], ["open", 0]]),
    (19, "SET", [["end", "B"], ["mask", 0], ["open", 1]]),
    (20, "TABLE", [["start", 16], ["count", 16]]),
    (21, "TEST", [["dwell_ms", 50]]),
    (22, "TLOAD", [["start", 0], ["rows", 3], ["t", "5:410.2,1:455.0,3:498.7"]]),
    (22, "OK", [["staged", 3], ["rows", 3], ["done", 1]]),
    (65535, "PING", []),
    (17, "OK", [["end", "A"], ["mask", 37], ["open", 0], ["ohms", "1009.0"], ["changed", 1]]),
    (3, "OK", [["end", "B"], ["mask", 5], ["open", 0], ["fw", "0.1.0"], ["boots", 12],
               ["up_s", 3600], ["heap", 30112]]),
    (0, "EVT", [["kind", "boot"], ["fw", "0.1.0"], ["boots", 3], ["restored", 1]]),
]

ERRORS = [
    (17, "RANGE", "mask=200 outside 0..127"),
    (0, "SIZE", "line longer than 512 bytes"),
    (5, "HW", "relay *3* stuck\tcoil"),
]


def _frame(seq, verb, fields):
    return wire.encode(seq, verb, [tuple(f) for f in fields]).decode()


def _good(line):
    return line


def _bad_crc(line):
    body, check = line.rsplit(" *", 1)
    wrong = "%04X" % (int(check[:4], 16) ^ 0x0001)
    return body + " *" + wrong + "\n"


def requests_bad():
    ok = _frame(17, "SET", [["end", "A"], ["mask", 37], ["open", 0]])
    sealed = lambda body: (body + " *%04X\n" % wire.crc16_ccitt_false(body.encode()))
    long_body = "NS1 9 SET end=A mask=1 open=0 " + "x" * 520
    return [
        {"name": "bad check value", "line": _bad_crc(ok), "code": "CRC", "seq": 17},
        {"name": "truncated (no check value)", "line": ok[:20] + "\n", "code": "FORMAT",
         "seq": 17},
        {"name": "check value not hex", "line": ok[:-5] + "ZZZZ\n", "code": "FORMAT",
         "seq": 17},
        {"name": "lower-case check digits", "line": ok[:-5] + ok[-5:].lower(),
         "code": "FORMAT", "seq": 17},
        {"name": "space-padded check digits", "line": sealed("NS1 20 PING").replace(
            " *0", " * "), "code": "FORMAT", "seq": 20},  # check 0E1B written " E1B"
        {"name": "marker with a sign", "line": sealed("NS+1 4 PING"), "code": "FORMAT",
         "seq": 4},
        {"name": "zero-padded marker", "line": sealed("NS01 4 PING"), "code": "FORMAT",
         "seq": 4},
        {"name": "zero-padded seq", "line": sealed("NS1 04 PING"), "code": "FORMAT",
         "seq": 0},
        {"name": "oversize line", "line": sealed(long_body), "code": "SIZE", "seq": 0},
        {"name": "wrong protocol version", "line": sealed("NS2 4 PING"), "code": "VERSION",
         "seq": 4},
        {"name": "not our marker", "line": sealed("XY1 4 PING"), "code": "FORMAT", "seq": 4},
        {"name": "unknown verb", "line": sealed("NS1 5 JUMP"), "code": "VERB", "seq": 5},
        {"name": "unknown key", "line": sealed("NS1 6 SET foo=1"), "code": "KEY", "seq": 6},
        {"name": "duplicate key", "line": sealed("NS1 7 SET end=A end=B mask=1 open=0"),
         "code": "KEY", "seq": 7},
        {"name": "field without =", "line": sealed("NS1 8 SET end"), "code": "FORMAT",
         "seq": 8},
        {"name": "seq zero in a request", "line": sealed("NS1 0 PING"), "code": "FORMAT",
         "seq": 0},
        {"name": "seq too large", "line": sealed("NS1 65536 PING"), "code": "FORMAT",
         "seq": 0},
        {"name": "non-printable byte", "line_hex": (b"NS1 9 PING\x01 *0000\n").hex(),
         "code": "FORMAT", "seq": 0},
        {"name": "non-ASCII byte", "line_hex": (b"NS1 9 PING \xc3\xa9 *0000\n").hex(),
         "code": "FORMAT", "seq": 0},
    ]


FIELD_INT = [  # fields, key, lo, hi, expected value or error code
    ({"mask": "37"}, "mask", 0, 127, 37),
    ({"mask": "0x25"}, "mask", 0, 127, 37),
    ({"mask": "128"}, "mask", 0, 127, "RANGE"),
    ({"mask": "-1"}, "mask", 0, 127, "RANGE"),
    ({"mask": "1.5"}, "mask", 0, 127, "FORMAT"),
    ({"mask": "12a"}, "mask", 0, 127, "FORMAT"),
    ({"mask": "0x1_0"}, "mask", 0, 127, "FORMAT"),  # no digit separators
    ({"mask": "1_0"}, "mask", 0, 127, "FORMAT"),
    ({"mask": "037"}, "mask", 0, 127, "FORMAT"),  # no padding
    ({"mask": "+37"}, "mask", 0, 127, "FORMAT"),
    ({"mask": "0X25"}, "mask", 0, 127, "FORMAT"),  # the hex prefix is 0x
    ({"mask": "0x"}, "mask", 0, 127, "FORMAT"),
    ({}, "mask", 0, 127, "MISSING"),
]
FIELD_FLOAT = [
    ({"ohms": "900"}, "ohms", 195.0, 5034.0, 900.0),
    ({"ohms": "1.2e3"}, "ohms", 195.0, 5034.0, 1200.0),
    ({"ohms": "100"}, "ohms", 195.0, 5034.0, "RANGE"),
    ({"ohms": "nan"}, "ohms", 195.0, 5034.0, "FORMAT"),
    ({"ohms": "inf"}, "ohms", 195.0, 5034.0, "FORMAT"),
    ({"ohms": "-inf"}, "ohms", 195.0, 5034.0, "FORMAT"),
    ({"ohms": "1e999"}, "ohms", 195.0, 5034.0, "FORMAT"),  # overflows to infinity
    ({"ohms": "abc"}, "ohms", 195.0, 5034.0, "FORMAT"),
    ({"ohms": "1_200"}, "ohms", 195.0, 5034.0, "FORMAT"),  # no digit separators
    ({"ohms": "0900"}, "ohms", 195.0, 5034.0, "FORMAT"),  # no padding
    ({"ohms": "900."}, "ohms", 195.0, 5034.0, "FORMAT"),
    ({"ohms": ".5e3"}, "ohms", 195.0, 5034.0, "FORMAT"),
    ({"ohms": "3889.4"}, "ohms", 195.0, 3889.4, 3889.4),
]
FIELD_CHOICE = [
    ({"end": "A"}, "end", ["A", "B"], "A"),
    ({"end": "b"}, "end", ["A", "B"], "RANGE"),
    ({}, "end", ["A", "B"], "MISSING"),
]


def main():
    vectors = {
        "about": "Golden vectors of the nullsteer board protocol (NS1). Lines are ASCII "
                 "strings; line_hex when not printable. Checked under CPython and "
                 "MicroPython by tests/test_wire_golden.py.",
        "crc": [
            {"data": "123456789", "crc": "29B1",
             "source": "CRC RevEng catalogue, CRC-16/IBM-3740 alias CCITT-FALSE, check"},
        ],
        "hmac_sha256": [
            {"key_hex": "4a656665", "data": "what do ya want for nothing?",
             "mac_hex": "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843",
             "source": "RFC 4231 section 4.3, test case 2"},
        ],
        "encode": [{"seq": s, "verb": v, "fields": f, "line": _frame(s, v, f)}
                   for s, v, f in ENCODE],
        "encode_error": [{"seq": s, "code": c, "message": m,
                          "line": wire.encode_error(s, c, m).decode()} for s, c, m in ERRORS],
        "request_errors": requests_bad(),
        "field_int": [{"fields": f, "key": k, "lo": lo, "hi": hi, "expect": e}
                      for f, k, lo, hi, e in FIELD_INT],
        "field_float": [{"fields": f, "key": k, "lo": lo, "hi": hi, "expect": e}
                        for f, k, lo, hi, e in FIELD_FLOAT],
        "field_choice": [{"fields": f, "key": k, "choices": c, "expect": e}
                         for f, k, c, e in FIELD_CHOICE],
        "signed": [{"seq": 40, "verb": "SET", "fields": [["end", "B"], ["mask", 5], ["open", 0]],
                    "key_hex": b"flag-ne-demo-key".hex(), "ctr": 1207,
                    "line": wire.sign(40, "SET", (("end", "B"), ("mask", 5), ("open", 0)),
                                      b"flag-ne-demo-key", 1207).decode()},
                   {"seq": 41, "verb": "ERR", "fields": [["code", "REPLAY"],
                                                         ["msg", "counter_not_above_1300"]],
                    "key_hex": b"flag-ne-demo-key".hex(), "ctr": 1300,
                    "line": wire.sign(41, "ERR", (("code", "REPLAY"),
                                                  ("msg", "counter_not_above_1300")),
                                      b"flag-ne-demo-key", 1300).decode()}],
    }
    (HERE / "wire_vectors.json").write_text(json.dumps(vectors, indent=1) + "\n")


if __name__ == "__main__":
    main()
