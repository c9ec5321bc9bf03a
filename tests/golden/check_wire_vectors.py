"""Check wire.py against wire_vectors.json; runs under MicroPython and CPython alike.

    micropython check_wire_vectors.py <vectors.json>     (wire.py on MICROPYPATH)

Prints one line per failure and a last line ``checked <n> failed <m>``; exit status 1 on
any failure. Kept in the subset both interpreters share (no f-strings with '=', no
typing, no bytes.hex).
"""

import json
import sys

try:
    import binascii
except ImportError:  # pragma: no cover
    import ubinascii as binascii  # type: ignore

import wire


def _line(case):
    if "line_hex" in case:
        return binascii.unhexlify(case["line_hex"])
    return case["line"].encode()


def _code_of(fn):
    try:
        return fn(), None
    except wire.WireError as exc:
        return None, exc


def run(vectors):
    failures = []
    count = [0]

    def check(ok, what):
        count[0] += 1
        if not ok:
            failures.append(what)

    for c in vectors["crc"]:
        got = "%04X" % wire.crc16_ccitt_false(c["data"].encode())
        check(got == c["crc"], "crc %s: %s != %s" % (c["data"], got, c["crc"]))
    for c in vectors["hmac_sha256"]:
        mac = wire.hmac_sha256(binascii.unhexlify(c["key_hex"]), c["data"].encode())
        check(binascii.hexlify(mac).decode() == c["mac_hex"], "hmac " + c["source"])
    for c in vectors["encode"]:
        fields = [(f[0], f[1]) for f in c["fields"]]
        got = wire.encode(c["seq"], c["verb"], fields)
        check(got == c["line"].encode(), "encode %r -> %r" % (c["line"], got))
        frame = wire.decode(got)
        want = {}
        for f in c["fields"]:
            want[f[0]] = wire.format_value(f[1])
        check(frame.seq == c["seq"] and frame.verb == c["verb"] and frame.fields == want,
              "decode %r" % c["line"])
        if c["verb"] in wire.REQUEST_KEYS:
            check(wire.decode_request(got).verb == c["verb"], "decode_request " + c["line"])
        else:
            check(wire.decode_reply(got).verb == c["verb"], "decode_reply " + c["line"])
    for c in vectors["encode_error"]:
        got = wire.encode_error(c["seq"], c["code"], c["message"])
        check(got == c["line"].encode(), "encode_error %r -> %r" % (c["line"], got))
        frame = wire.decode_reply(got)
        check(frame.verb == "ERR" and frame.fields["code"] == c["code"], "ERR fields")
    for c in vectors["request_errors"]:
        _, exc = _code_of(lambda: wire.decode_request(_line(c)))
        got = None if exc is None else (exc.code, exc.seq)
        check(got == (c["code"], c["seq"]), "%s: got %r want %r" % (c["name"], got,
                                                                  (c["code"], c["seq"])))
    readers = (
        ("field_int", lambda c: wire.field_int(c["fields"], c["key"], c["lo"], c["hi"])),
        ("field_float", lambda c: wire.field_float(c["fields"], c["key"], c["lo"], c["hi"])),
        ("field_choice", lambda c: wire.field_choice(c["fields"], c["key"],
                                                     tuple(c["choices"]))),
    )
    for name, reader in readers:
        for c in vectors[name]:
            value, exc = _code_of(lambda: reader(c))
            got = value if exc is None else exc.code
            check(got == c["expect"], "%s %r: got %r want %r" % (name, c["fields"], got,
                                                              c["expect"]))
    for c in vectors["signed"]:
        key = binascii.unhexlify(c["key_hex"])
        fields = [(f[0], f[1]) for f in c["fields"]]
        got = wire.sign(c["seq"], c["verb"], fields, key, c["ctr"])
        check(got == c["line"].encode(), "sign -> %r" % got)
        check(wire.verify(got, key) == c["ctr"], "verify good signature")
        _, exc = _code_of(lambda: wire.verify(got, key + b"x"))
        check(exc is not None and exc.code == wire.E_AUTH, "verify with a wrong key")
    return count[0], failures


def main(path):
    with open(path) as f:
        vectors = json.load(f)
    n, failures = run(vectors)
    for line in failures:
        print("FAIL", line)
    print("checked %d failed %d" % (n, len(failures)))
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1]))
