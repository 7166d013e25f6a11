"""Raw clock/data frames forwarded by the microcontroller bridge.

The bridge (firmware_notes/) normally sends ordinary reading lines, which
logger.formats.decode understands with no configuration.  In its raw-frame mode it
forwards every captured frame as one line ``F:<variant>:<nbits>:<HEX>``
(the frame's bits in transmission order, packed first-sent bit lowest, bit i
in byte i // 8 at bit i % 8).  This module decodes those frames with the same
layouts as firmware_notes/src/frame.c; both are checked against the shared
vectors in firmware_notes/vectors/frames.tsv.

The layouts are FROM MEMORY, to be confirmed on the user's own device with a
logic analyser (firmware_notes/README.md):

- ``rel24x2``: 24-bit two-packet relative/absolute frame, 48 bits: absolute
  word then relative (displayed) word, each 24-bit two's complement, first
  bit least significant, 20480 counts per inch; bits 20..23 of each word
  must all equal its sign.  Reported in inches rounded to 0.00001 in, half
  away from zero.
- ``sign24``: 24-bit sign-and-unit frame: bits 0..19 magnitude, bit 20 sign
  (1 negative), bits 21..22 zero, bit 23 unit (1 inch); 0.01 mm or 0.0005 in
  per count.
- ``bcd13``: 13-nibble BCD frame (request line), 52 bits, each nibble first
  bit least significant: four 0xF header nibbles, sign (0 or 8), six BCD
  digits most significant first, decimal places (0..5), unit (0 mm, 1 inch).
"""

from __future__ import annotations

import re
from collections.abc import Sequence

FRAME_BITS = {"rel24x2": 48, "sign24": 24, "bcd13": 52}
MAX_FRAME_BITS = 64  # the bridge's buffer; a longer frame is reported as 65 bits

_FRAME_LINE = re.compile(rb"F:([a-z0-9]{1,16}):(\d{1,2}):((?:[0-9A-Fa-f]{2}){0,8})\r?\n?\Z")


def decode_frame_line(raw: bytes) -> tuple[float, str] | None:
    """(value, unit) for a valid raw-frame line, None for anything else.

    Never raises: a reading line, noise, a truncated line or a frame that
    fails its checks all give None.
    """
    m = _FRAME_LINE.match(raw)
    if m is None:
        return None
    variant = m.group(1).decode("ascii")
    nbits = int(m.group(2))
    data = bytes.fromhex(m.group(3).decode("ascii"))
    if variant not in FRAME_BITS or nbits != FRAME_BITS[variant] or len(data) != (nbits + 7) // 8:
        return None
    word = int.from_bytes(data, "little")
    if word >> nbits:  # padding bits past the frame must be clear
        return None
    try:
        return decode_frame(variant, word)
    except ValueError:
        return None


def decode_frame(variant: str, bits: Sequence[int] | int) -> tuple[float, str]:
    """Decode one frame into (value in its unit, "mm" or "in").

    `bits` is either the data bits in transmission order (a sequence of 0/1,
    whose length is checked) or an int whose bit i is the i-th bit sent (the
    frame is then taken to have the variant's length).  Raises ValueError for
    an unknown variant or a frame that fails its checks; the message starts
    with the reason word frame.c uses (length, sign, flags, header, digit,
    decimals).
    """
    mantissa, decimals, unit = decode_frame_exact(variant, bits)
    return mantissa / 10**decimals, unit


def decode_frame_exact(variant: str, bits: Sequence[int] | int) -> tuple[int, int, str]:
    """Like decode_frame, but exact: value = mantissa / 10**decimals."""
    if variant not in FRAME_BITS:
        raise ValueError(f"variant: unknown frame variant {variant!r} (known: {', '.join(FRAME_BITS)})")
    want = FRAME_BITS[variant]
    if isinstance(bits, int):
        if bits < 0 or bits >> want:
            raise ValueError(f"length: {variant} frame value does not fit in {want} bits")
        word = bits
    else:
        if len(bits) != want:
            raise ValueError(f"length: {variant} frame has {len(bits)} bits, expected {want}")
        if any(b not in (0, 1) for b in bits):
            raise ValueError("bits: frame bits must be 0 or 1")
        word = sum(b << i for i, b in enumerate(bits))
    return _DECODERS[variant](word)


def _field(word: int, first: int, width: int) -> int:
    return (word >> first) & ((1 << width) - 1)


def _word24(word: int, first: int) -> int:
    w = _field(word, first, 24)
    top = w >> 20
    if top not in (0, 0xF):
        raise ValueError(f"sign: bits 20..23 of the word at bit {first} disagree ({top:04b})")
    return w - (1 << 24) if top else w


def _rel24x2(word: int) -> tuple[int, int, str]:
    _word24(word, 0)  # the absolute word is checked, not reported
    counts = _word24(word, 24)
    # counts / 20480 in = counts * 625 / 128 hundred-thousandths of an inch
    e5 = (abs(counts) * 625 + 64) // 128
    return (-e5 if counts < 0 else e5), 5, "in"


def _sign24(word: int) -> tuple[int, int, str]:
    mag = _field(word, 0, 20)
    if _field(word, 21, 2):
        raise ValueError("flags: reserved bits 21..22 set")
    if _field(word, 23, 1):
        mantissa, decimals, unit = mag * 5, 4, "in"  # 0.0005 in per count
    else:
        mantissa, decimals, unit = mag, 2, "mm"  # 0.01 mm per count
    return (-mantissa if _field(word, 20, 1) else mantissa), decimals, unit


def _bcd13(word: int) -> tuple[int, int, str]:
    nibbles = [_field(word, 4 * k, 4) for k in range(13)]
    if nibbles[:4] != [0xF] * 4:
        raise ValueError("header: the four header nibbles must be 0xF")
    if nibbles[4] not in (0, 8):
        raise ValueError(f"sign: sign nibble {nibbles[4]} (expected 0 or 8)")
    digits = nibbles[5:11]
    if max(digits) > 9:
        raise ValueError("digit: a BCD digit is above 9")
    if nibbles[11] > 5:
        raise ValueError(f"decimals: {nibbles[11]} decimal places (at most 5)")
    if nibbles[12] > 1:
        raise ValueError(f"flags: unit code {nibbles[12]} (0 mm, 1 inch)")
    mantissa = int("".join(map(str, digits)))
    return (-mantissa if nibbles[4] else mantissa), nibbles[11], ("in" if nibbles[12] else "mm")


_DECODERS = {"rel24x2": _rel24x2, "sign24": _sign24, "bcd13": _bcd13}
