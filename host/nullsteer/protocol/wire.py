"""The board protocol codec: one definition, shared by the host and the firmware.

This module is written in the common subset of CPython 3.11 and MicroPython (no
dataclasses, no typing at run time, no f-string debugging forms) and is copied onto the
board next to the firmware. Everything that turns bytes into frames, and frames into
bytes, lives here, and golden vectors under ``tests/`` pin the bytes on both
interpreters.

Frame layout (one ASCII line, readable on a serial terminal)::

    NS1 <seq> <VERB> [key=value ...] *<CRC>\\n

* ``NS1``: protocol marker and version (``NS`` + decimal version).
* ``<seq>``: decimal sequence number, 1..65535 for requests; replies echo it; 0 is
  used by unsolicited events and by error replies to frames whose number is unreadable.
* ``<VERB>``: a request verb (``PING INFO STATUS SET TEST TABLE``) or a reply verb
  (``OK ERR EVT``).
* fields: ``key=value``; keys are ``[a-z][a-z0-9_]*`` (at most 16 characters); values
  are 1..200 printable ASCII characters without spaces or ``*``.
* ``*<CRC>``: CRC-16/CCITT-FALSE (poly 0x1021, init 0xFFFF, no reflection, no final
  XOR) of every byte before the space that precedes ``*``, as exactly four upper-case hex
  digits (``0-9A-F``).
* a line is at most :data:`MAX_LINE` bytes including its ``\\n``; ``\\r\\n`` is accepted.
* numbers are exact: the marker is ``NS`` + the version without sign or padding; the
  sequence number and decimal fields have no sign (``-`` only where a field may be
  negative), no leading zeros, no digit separators; hex fields are ``0x`` + 1..8 hex
  digits; decimal fractions are ``digits[.digits][e[+-]digits]`` and finite.

An optional per-device key signs a request: fields ``ctr=<counter>`` (1..CTR_MAX, larger
than every counter the board accepted before) and, last, ``sig=<64 hex>`` =
HMAC-SHA256(key, every byte before `` sig=``). See :func:`sign`.

Errors are raised as :class:`WireError` with one of the ``E_*`` codes; the firmware turns
them into ``ERR`` replies with :func:`encode_error`.
"""

try:  # CPython and MicroPython both have these; MicroPython names may differ.
    import hashlib
except ImportError:  # pragma: no cover
    import uhashlib as hashlib  # type: ignore
import math

try:
    import binascii
except ImportError:  # pragma: no cover
    import ubinascii as binascii  # type: ignore

VERSION = 1
MARKER = "NS"
MAX_LINE = 512
MAX_KEY = 16
MAX_VALUE = 200
SEQ_MAX = 65535
CTR_MAX = 2 ** 48 - 1  # largest frame counter of a signed frame

# Request verbs and the keys each one takes (besides the signature keys).
REQUEST_KEYS = {
    "PING": (),
    "INFO": (),
    "STATUS": (),
    "SET": ("end", "mask", "open", "ohms", "short"),
    "TEST": ("dwell_ms",),
    "TABLE": ("start", "count"),
    "TLOAD": ("start", "rows", "t"),
}
AUTH_KEYS = ("ctr", "sig")
REPLY_VERBS = ("OK", "ERR", "EVT")

# Error codes (the ``code=`` of an ERR reply).
E_SIZE = "SIZE"  # line longer than MAX_LINE
E_FORMAT = "FORMAT"  # not a frame: truncated, bad token, bad number, non-ASCII
E_CRC = "CRC"  # check value does not match
E_VERSION = "VERSION"  # protocol version not spoken by this side
E_VERB = "VERB"  # unknown verb
E_KEY = "KEY"  # unknown or duplicated key for this verb
E_MISSING = "MISSING"  # a required key is absent
E_RANGE = "RANGE"  # a value out of range (mask beyond the ladder, end not A/B...)
E_AUTH = "AUTH"  # signature missing or wrong
E_REPLAY = "REPLAY"  # signed frame whose counter is not above the last accepted one
E_STATE = "STATE"  # command not possible in the board's state (e.g. no ladder table)
E_HW = "HW"  # hardware fault reported by the board
ERROR_CODES = (E_SIZE, E_FORMAT, E_CRC, E_VERSION, E_VERB, E_KEY, E_MISSING, E_RANGE,
               E_AUTH, E_REPLAY, E_STATE, E_HW)


class WireError(Exception):
    """A frame that fails a check. ``code`` is an ``E_*`` string; ``seq`` the number if known."""

    def __init__(self, code, message, seq=0):
        super().__init__(code + ": " + message)
        self.code = code
        self.message = message
        self.seq = seq


class Frame:
    """A decoded frame: ``version``, ``seq``, ``verb`` and ``fields`` (dict of str)."""

    def __init__(self, seq, verb, fields, version=VERSION):
        self.version = version
        self.seq = seq
        self.verb = verb
        self.fields = fields

    def __repr__(self):
        return "Frame(%d, %r, %r)" % (self.seq, self.verb, self.fields)


def crc16_ccitt_false(data, crc=0xFFFF):
    """CRC-16/CCITT-FALSE of ``data`` (bytes); check value of b"123456789" is 0x29B1."""
    for byte in data:
        crc ^= byte << 8
        for _ in range(8):
            if crc & 0x8000:
                crc = ((crc << 1) ^ 0x1021) & 0xFFFF
            else:
                crc = (crc << 1) & 0xFFFF
    return crc


def _valid_key(key):
    if not key or len(key) > MAX_KEY:
        return False
    first = key[0]
    if not ("a" <= first <= "z"):
        return False
    for ch in key:
        if not ("a" <= ch <= "z" or "0" <= ch <= "9" or ch == "_"):
            return False
    return True


def _valid_value(value):
    if not value or len(value) > MAX_VALUE:
        return False
    for ch in value:
        o = ord(ch)
        if o < 0x21 or o > 0x7E or ch == "*":
            return False
    return True


def _digits(text):
    """True for a non-empty string of ASCII decimal digits."""
    if not text:
        return False
    for ch in text:
        if not ("0" <= ch <= "9"):
            return False
    return True


def parse_uint(text):
    """A decimal whole number without sign, padding or separators (``0``, ``17``);
    raises ValueError otherwise."""
    if not _digits(text) or (len(text) > 1 and text[0] == "0"):
        raise ValueError("not a plain decimal number")
    return int(text)


def parse_int(text):
    """:func:`parse_uint` with an optional ``-``, or ``0x`` + 1..8 hex digits."""
    if text.startswith("0x"):
        digits = text[2:]
        if not 1 <= len(digits) <= 8:
            raise ValueError("0x needs 1..8 hex digits")
        for ch in digits:
            if not ("0" <= ch <= "9" or "a" <= ch <= "f" or "A" <= ch <= "F"):
                raise ValueError("not a hex digit")
        return int(digits, 16)
    if text.startswith("-"):
        value = parse_uint(text[1:])
        if value == 0:
            raise ValueError("-0")
        return -value
    return parse_uint(text)


def parse_decimal(text):
    """A finite number written ``[-]digits[.digits][(e|E)[+-]digits]`` (integer part
    without padding); raises ValueError for anything else, nan, inf and overflow."""
    rest = text[1:] if text.startswith("-") else text
    mant, exp = rest, ""
    for mark in ("e", "E"):
        at = rest.find(mark)
        if at >= 0:
            mant, exp = rest[:at], rest[at + 1:]
            if exp[:1] in ("+", "-"):
                exp = exp[1:]
            if not _digits(exp):
                raise ValueError("bad exponent")
            break
    dot = mant.find(".")
    whole = mant if dot < 0 else mant[:dot]
    parse_uint(whole)
    if dot >= 0 and not _digits(mant[dot + 1:]):
        raise ValueError("bad fraction")
    value = float(text)
    if value != value or value in (float("inf"), float("-inf")):
        raise ValueError("not finite")
    return value


def _is_check(text):
    """Exactly four upper-case hex digits."""
    if len(text) != 4:
        return False
    for ch in text:
        if not ("0" <= ch <= "9" or "A" <= ch <= "F"):
            return False
    return True


def format_value(value):
    """The text of a field value: bools as 1/0, ints in decimal, strings as they are."""
    if value is True:
        return "1"
    if value is False:
        return "0"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        raise TypeError("format floats before encoding (e.g. '%.1f')")
    return str(value)


def _body(seq, verb, fields):
    if not (0 <= seq <= SEQ_MAX):
        raise ValueError("seq out of range: %r" % (seq,))
    parts = [MARKER + str(VERSION), str(seq), verb]
    for item in fields:
        key = item[0]
        text = format_value(item[1])
        if not _valid_key(key):
            raise ValueError("bad key: %r" % (key,))
        if not _valid_value(text):
            raise ValueError("bad value for %s: %r" % (key, text))
        parts.append(key + "=" + text)
    return " ".join(parts)


def _seal(body):
    raw = body.encode()
    line = raw + (" *%04X\n" % crc16_ccitt_false(raw)).encode()
    if len(line) > MAX_LINE:
        raise ValueError("frame longer than %d bytes" % MAX_LINE)
    return line


def encode(seq, verb, fields=()):
    """Encode a frame. ``fields`` is a sequence of (key, value) pairs (order is kept)."""
    return _seal(_body(seq, verb, fields))


def encode_error(seq, code, message):
    """An ``ERR`` reply; spaces in ``message`` become ``_``, unusable characters ``?``."""
    clean = []
    for ch in message[:MAX_VALUE]:
        o = ord(ch)
        if ch == " ":
            clean.append("_")
        elif o < 0x21 or o > 0x7E or ch == "*":
            clean.append("?")
        else:
            clean.append(ch)
    text = "".join(clean) or "-"
    return encode(seq, "ERR", (("code", code), ("msg", text)))


def hmac_sha256(key, message):
    """HMAC-SHA256 (RFC 2104) of ``message`` under ``key``, both bytes; 32 bytes out."""
    block = 64
    if len(key) > block:
        key = hashlib.sha256(key).digest()
    key = key + b"\x00" * (block - len(key))
    inner = hashlib.sha256(bytes([b ^ 0x36 for b in key]) + message).digest()
    return hashlib.sha256(bytes([b ^ 0x5C for b in key]) + inner).digest()


def sign(seq, verb, fields, key, ctr):
    """Encode a frame signed with ``key`` (bytes) and frame counter ``ctr`` (1..CTR_MAX).

    Requests carry the host's next counter; the board signs its ``ERR code=REPLAY``
    reply with its last accepted counter, so a host can catch up (PROTOCOL.md)."""
    if not (1 <= ctr <= CTR_MAX):
        raise ValueError("ctr out of range: %r" % (ctr,))
    body = _body(seq, verb, tuple(fields) + (("ctr", ctr),))
    digest = binascii.hexlify(hmac_sha256(key, body.encode())).decode()
    return _seal(body + " sig=" + digest)


def verify(line, key):
    """Check the signature of a raw line; returns its counter ``ctr`` (int).

    Raises :class:`WireError` ``E_AUTH`` when the signature is absent or wrong or the
    counter is not the field just before it. The caller checks ``ctr`` against the
    last accepted one.
    """
    text = _strip(line)
    star = text.rfind(" *")
    at = text.rfind(" sig=")
    if at < 0 or star < 0 or at > star:
        raise WireError(E_AUTH, "frame is not signed")
    body = text[:at]
    given = text[at + 5:star]
    want = binascii.hexlify(hmac_sha256(key, body.encode())).decode()
    if not _same(given, want):
        raise WireError(E_AUTH, "signature does not match")
    ctr_at = body.rfind(" ctr=")
    if ctr_at < 0:
        raise WireError(E_AUTH, "signed frame has no ctr")
    try:
        ctr = parse_uint(body[ctr_at + 5:])
    except ValueError:
        raise WireError(E_AUTH, "bad ctr")
    if not (1 <= ctr <= CTR_MAX):
        raise WireError(E_AUTH, "ctr out of range")
    return ctr


def _same(a, b):
    """Compare two strings in time independent of where they differ."""
    if len(a) != len(b):
        return False
    diff = 0
    for i in range(len(a)):
        diff |= ord(a[i]) ^ ord(b[i])
    return diff == 0


def _strip(line):
    if isinstance(line, (bytes, bytearray)):
        if len(line) > MAX_LINE:
            raise WireError(E_SIZE, "line longer than %d bytes" % MAX_LINE)
        for b in line:
            if b > 0x7E or (b < 0x20 and b not in (10, 13)):
                raise WireError(E_FORMAT, "non-printable byte 0x%02X" % b)
        line = line.decode()
    else:
        if len(line) > MAX_LINE:
            raise WireError(E_SIZE, "line longer than %d bytes" % MAX_LINE)
        for ch in line:
            o = ord(ch)
            if o > 0x7E or (o < 0x20 and o not in (10, 13)):
                raise WireError(E_FORMAT, "non-printable character 0x%02X" % o)
    if line.endswith("\n"):
        line = line[:-1]
    if line.endswith("\r"):
        line = line[:-1]
    return line


def _guess_seq(text):
    parts = text.split(" ")
    if len(parts) > 1:
        try:
            n = parse_uint(parts[1])
            if n <= SEQ_MAX:
                return n
        except ValueError:
            pass
    return 0


def decode(line):
    """Decode one line (bytes or str) into a :class:`Frame`, checking size, CRC and form.

    Does not check the verb against the request table (see :func:`decode_request`).
    """
    text = _strip(line)
    star = text.rfind(" *")
    if star < 0:
        raise WireError(E_FORMAT, "no check value (truncated frame?)", _guess_seq(text))
    body = text[:star]
    check = text[star + 2:]
    seq_guess = _guess_seq(body)
    if not _is_check(check):
        raise WireError(E_FORMAT, "check value must be 4 upper-case hex digits", seq_guess)
    want = int(check, 16)
    if crc16_ccitt_false(body.encode()) != want:
        raise WireError(E_CRC, "check value does not match", seq_guess)
    parts = body.split(" ")
    if len(parts) < 3:
        raise WireError(E_FORMAT, "frame needs marker, seq and verb", seq_guess)
    marker = parts[0]
    if not marker.startswith(MARKER):
        raise WireError(E_FORMAT, "frame must start with " + MARKER, seq_guess)
    try:
        version = parse_uint(marker[len(MARKER):])
    except ValueError:
        raise WireError(E_FORMAT, "bad version number", seq_guess)
    if version != VERSION:
        raise WireError(E_VERSION, "protocol version %d not supported (speaks %d)"
                        % (version, VERSION), seq_guess)
    seq_text = parts[1]
    try:
        seq = parse_uint(seq_text) if len(seq_text) <= 5 else SEQ_MAX + 1
    except ValueError:
        seq = SEQ_MAX + 1
    if seq > SEQ_MAX:
        raise WireError(E_FORMAT, "bad sequence number", 0)
    verb = parts[2]
    fields = {}
    for token in parts[3:]:
        eq = token.find("=")
        if eq <= 0:
            raise WireError(E_FORMAT, "field is not key=value: " + token[:20], seq)
        key = token[:eq]
        value = token[eq + 1:]
        if not _valid_key(key) or not _valid_value(value):
            raise WireError(E_FORMAT, "bad field: " + token[:20], seq)
        if key in fields:
            raise WireError(E_KEY, "duplicate key " + key, seq)
        fields[key] = value
    return Frame(seq, verb, fields, version)


def decode_request(line):
    """Decode a request and check its verb and keys against :data:`REQUEST_KEYS`."""
    frame = decode(line)
    allowed = REQUEST_KEYS.get(frame.verb)
    if allowed is None:
        raise WireError(E_VERB, "unknown verb " + frame.verb[:12], frame.seq)
    for key in frame.fields:
        if key not in allowed and key not in AUTH_KEYS:
            raise WireError(E_KEY, "unknown key %s for %s" % (key, frame.verb), frame.seq)
    if frame.seq == 0:
        raise WireError(E_FORMAT, "request seq must be 1..65535", 0)
    return frame


def decode_reply(line):
    """Decode a reply (``OK``/``ERR``/``EVT``)."""
    frame = decode(line)
    if frame.verb not in REPLY_VERBS:
        raise WireError(E_VERB, "not a reply verb: " + frame.verb[:12], frame.seq)
    return frame


def field_int(fields, key, lo, hi, seq=0, default=None):
    """An integer field (:func:`parse_int`: decimal, or hex with ``0x``) within lo..hi."""
    text = fields.get(key)
    if text is None:
        if default is not None:
            return default
        raise WireError(E_MISSING, "missing " + key, seq)
    try:
        value = parse_int(text)
    except ValueError:
        raise WireError(E_FORMAT, "%s is not a whole number" % key, seq)
    if value < lo or value > hi:
        raise WireError(E_RANGE, "%s=%d outside %d..%d" % (key, value, lo, hi), seq)
    return value


def field_float(fields, key, lo, hi, seq=0):
    """A decimal number field (:func:`parse_decimal`, finite) within lo..hi inclusive."""
    text = fields.get(key)
    if text is None:
        raise WireError(E_MISSING, "missing " + key, seq)
    try:
        value = parse_decimal(text)
    except ValueError:
        raise WireError(E_FORMAT, "%s is not a finite decimal number" % key, seq)
    if not (lo <= value <= hi):
        raise WireError(E_RANGE, "%s=%s outside %s..%s" % (key, text, lo, hi), seq)
    return value


def field_choice(fields, key, choices, seq=0, default=None):
    """A field whose value is one of ``choices``."""
    text = fields.get(key)
    if text is None:
        if default is not None:
            return default
        raise WireError(E_MISSING, "missing " + key, seq)
    if text not in choices:
        raise WireError(E_RANGE, "%s must be one of %s" % (key, "/".join(choices)), seq)
    return text


def field_bool(fields, key, seq=0, default=None):
    """A 0/1 field as a bool."""
    return field_choice(fields, key, ("0", "1"), seq,
                        None if default is None else ("1" if default else "0")) == "1"


def format_ohms(ohms):
    """Ohms as the protocol writes them: one decimal (``820.0``)."""
    return "%.1f" % ohms



def nearest_index(table_ohms, ohms):
    """Index of the entry of ``table_ohms`` (positive ohms) nearest ``ohms`` by ratio.

    "Nearest by ratio" minimises |ln(R / R_k)|, so 450 Ω is as far from 900 Ω as 1800 Ω
    is; the lower index wins a tie. ``table_ohms`` is a non-empty sequence, ``ohms`` > 0.
    """
    best = 0
    best_d = abs(math.log(ohms / table_ohms[0]))
    for k in range(1, len(table_ohms)):
        d = abs(math.log(ohms / table_ohms[k]))
        if d < best_d:
            best, best_d = k, d
    return best


def nearest_by_ratio(table, ohms):
    """The (mask, ohms) entry of ``table`` nearest ``ohms`` by ratio (see nearest_index).

    Returns ``(mask, entry_ohms, error_pct)`` with the signed error
    ``100·(entry/ohms − 1)``; None for an empty table or ``ohms`` <= 0.
    """
    if ohms <= 0 or not table:
        return None
    mask, r = table[nearest_index([row[1] for row in table], ohms)]
    return (mask, r, 100.0 * (r / ohms - 1.0))
