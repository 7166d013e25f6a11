"""The raw-frame decoder (logger.formats.frames) against the shared bridge vectors,
against the portable C decoder built with the host compiler, and against
encoders written here from the documented layouts (firmware_notes/README.md;
the layouts themselves are from memory, to be confirmed on a real device)."""

from __future__ import annotations

import shutil
import subprocess
from decimal import ROUND_HALF_UP, Decimal
from fractions import Fraction
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from logger.formats.decode import Decoder
from logger.formats.frames import FRAME_BITS, decode_frame, decode_frame_exact, decode_frame_line
from logger.units import to_mm

ROOT = Path(__file__).resolve().parents[2]
FW = ROOT / "firmware_notes"
VECTORS = FW / "vectors" / "frames.tsv"


def load_vectors() -> list[dict]:
    rows = [ln for ln in VECTORS.read_text().splitlines() if ln and not ln.startswith("#")]
    names = rows[0].split("\t")
    return [dict(zip(names, r.split("\t"), strict=True)) for r in rows[1:]]


VEC = load_vectors()


def python_result(variant: str, bits: list[int]) -> str:
    """The bridge's reading line for a frame, or reject:<reason>, from Python."""
    try:
        mantissa, decimals, unit = decode_frame_exact(variant, bits)
    except ValueError as e:
        return "reject:" + str(e).split(":")[0]
    sign = "-" if mantissa < 0 else "+"
    digits = str(abs(mantissa)).rjust(decimals + 1, "0")
    whole, frac = digits[: len(digits) - decimals], digits[len(digits) - decimals :]
    return f"{sign}{whole}{'.' + frac if decimals else ''} {unit}"


def bits_of(v: int, n: int) -> list[int]:
    return [(v >> i) & 1 for i in range(n)]


def test_vectors_file_is_consistent():
    # The two encodings of every vector (bit string, packed hex) must agree,
    # and every variant and reject reason must be exercised.
    assert len(VEC) >= 30
    for v in VEC:
        bits = [int(c) for c in v["bits"]]
        packed = bytes.fromhex(v["hex"])
        assert len(packed) == (len(bits) + 7) // 8, v["name"]
        assert int.from_bytes(packed, "little") == sum(b << i for i, b in enumerate(bits)), v["name"]
        # The raw-frame line as the README's output section writes it: the bit count (65 past the
        # 64-bit buffer) and the frame's bytes, only the first 8 past it.
        assert v["raw"] == f"F:{v['variant']}:{min(len(bits), 65)}:{v['hex'][:16]}", v["name"]
    assert {v["variant"] for v in VEC} == set(FRAME_BITS)
    reasons = {v["expect"] for v in VEC if v["expect"].startswith("reject:")}
    assert reasons == {f"reject:{r}" for r in ("length", "sign", "flags", "header", "digit", "decimals")}


@pytest.mark.parametrize("v", VEC, ids=[v["name"] for v in VEC])
def test_python_decoder_on_vectors(v):
    # Expected values were worked by hand from the layout (the vectors' note column).
    bits = [int(c) for c in v["bits"]]
    assert python_result(v["variant"], bits) == v["expect"]
    expect = v["expect"]
    line = v["raw"].encode()
    if expect.startswith("reject:"):
        with pytest.raises(ValueError):
            decode_frame(v["variant"], bits)
        assert decode_frame_line(line) is None
    else:
        value_text, unit = expect.split(" ")
        want = (float(value_text), unit)
        assert decode_frame(v["variant"], bits) == want
        assert decode_frame(v["variant"], int.from_bytes(bytes.fromhex(v["hex"]), "little")) == want
        assert decode_frame_line(line) == want
        assert decode_frame_line(line + b"\r\n") == want


@pytest.fixture(scope="module")
def c_results(tmp_path_factory):
    """Build the host C test program with the system compiler and run it on the vectors."""
    cc = shutil.which("cc") or shutil.which("gcc")
    assert cc, "a C compiler (cc) is part of every machine this project targets"
    exe = tmp_path_factory.mktemp("cbuild") / "test_frame"
    src = [FW / "tests" / "test_frame.c", FW / "tests" / "vectors.c", FW / "src" / "frame.c"]
    subprocess.run(
        [cc, "-std=gnu11", "-Wall", "-Wextra", "-Werror", "-O2", f"-I{FW / 'src'}", f"-I{FW / 'tests'}",
         "-o", str(exe), *map(str, src)],
        check=True, capture_output=True, timeout=120,
    )
    proc = subprocess.run([str(exe), str(VECTORS)], capture_output=True, timeout=60)
    assert proc.returncode == 0, proc.stderr.decode()
    rows = [ln.split("\t") for ln in proc.stdout.decode().splitlines()]
    return {name: (result, raw) for name, result, raw in rows}


def test_c_decoder_agrees_with_python(c_results):
    assert set(c_results) == {v["name"] for v in VEC}
    decoder = Decoder(default_unit="mm")
    for v in VEC:
        result, raw = c_results[v["name"]]
        bits = [int(c) for c in v["bits"]]
        assert result == python_result(v["variant"], bits), v["name"]
        assert raw == v["raw"], v["name"]  # the vectors' hand-worked raw-frame line
        # The C bridge's raw-frame line, read back by the Python decoder.
        got = decode_frame_line(raw.encode())
        if result.startswith("reject:"):
            assert got is None, v["name"]
        else:
            value, unit = decode_frame(v["variant"], bits)
            assert got == (value, unit), v["name"]
            # The C bridge's reading line needs no configuration in the logger.
            reading = decoder.decode(result.encode() + b"\r", 0.0, 0.0)
            assert reading.unit == unit and reading.value_mm == to_mm(value, unit), v["name"]
        # The line decoder takes the raw-frame line too, with the frame decoder's value
        # (and a rejected frame is a bad line, never a reading).
        frame_reading = decoder.decode(raw.encode(), 0.0, 0.0)
        if result.startswith("reject:"):
            assert frame_reading.value_mm is None, v["name"]
        else:
            assert frame_reading.value_mm == to_mm(value, unit) and frame_reading.unit == unit, v["name"]


# --- round trips through encoders written from the documented layouts ---

@given(st.integers(0, 2**20 - 1), st.booleans(), st.booleans())
def test_sign24_round_trip(mag, negative, inch):
    bits = bits_of(mag | negative << 20 | inch << 23, 24)
    mantissa, decimals, unit = decode_frame_exact("sign24", bits)
    step = Fraction(5, 10000) if inch else Fraction(1, 100)  # 0.0005 in or 0.01 mm per count
    assert Fraction(mantissa, 10**decimals) == (-1 if negative else 1) * mag * step
    assert unit == ("in" if inch else "mm")


@given(st.integers(-(2**20), 2**20 - 1), st.integers(-(2**20), 2**20 - 1))
def test_rel24x2_round_trip(absolute, relative):
    word = (absolute & 0xFFFFFF) | (relative & 0xFFFFFF) << 24  # two's complement, absolute first
    mantissa, decimals, unit = decode_frame_exact("rel24x2", word)
    # Reference: the decimal module, 20480 counts per inch, half away from zero.
    exact = Decimal(relative) / Decimal(20480)
    assert Decimal(mantissa).scaleb(-decimals) == exact.quantize(Decimal("0.00001"), rounding=ROUND_HALF_UP)
    assert abs(Fraction(mantissa, 10**decimals) - Fraction(relative, 20480)) <= Fraction(1, 200000)
    assert unit == "in"


@given(st.integers(0, 999999), st.integers(0, 5), st.booleans(), st.booleans())
def test_bcd13_round_trip(number, decimals, negative, inch):
    digits = [int(c) for c in f"{number:06d}"]  # most significant first
    nibbles = [0xF] * 4 + [8 if negative else 0] + digits + [decimals, int(inch)]
    bits = [b for n in nibbles for b in bits_of(n, 4)]
    value, unit = decode_frame("bcd13", bits)
    assert value == (-number if negative else number) / 10**decimals
    assert unit == ("in" if inch else "mm")


@given(st.binary(max_size=80))
def test_frame_line_never_raises_on_noise(raw):
    got = decode_frame_line(raw)
    assert got is None or got[1] in ("mm", "in")


@given(
    st.sampled_from([*FRAME_BITS, "x", "sign2", ""]),
    st.integers(0, 99),
    st.binary(max_size=9),
    st.sampled_from([b"", b"\r", b"\n", b"\r\n", b" ", b"\n\n"]),
)
def test_frame_line_never_raises_on_near_misses(variant, nbits, data, end):
    raw = f"F:{variant}:{nbits}:".encode() + data.hex().upper().encode() + end
    got = decode_frame_line(raw)
    if got is not None:
        assert nbits == FRAME_BITS[variant] and len(data) == (nbits + 7) // 8
        assert got == decode_frame(variant, int.from_bytes(data, "little"))


def test_reading_lines_are_not_frame_lines():
    for line in (b"+12.345 mm", b"-0.50050 in\r", b"12,5", b"F:", b"F:sign24:24:D2040"):
        assert decode_frame_line(line) is None


def test_bad_arguments_raise_value_error():
    with pytest.raises(ValueError, match="variant"):
        decode_frame("nine-bit", [0] * 9)
    with pytest.raises(ValueError, match="bits"):
        decode_frame("sign24", [2] + [0] * 23)
    with pytest.raises(ValueError, match="length"):
        decode_frame("sign24", 1 << 24)
    with pytest.raises(ValueError, match="length"):
        decode_frame("sign24", -1)
