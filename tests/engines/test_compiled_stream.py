"""Python ints through marshal streams written by compiled kernels (polyconv.engines._pyints,
polyconv.engines._kernels_stream) against Python's own int.to_bytes / int.from_bytes and the
CRT computed with Python ints; and the portable routes they fall back to."""

from __future__ import annotations

import math
import random

import numpy as np
import pytest

pytest.importorskip("numba")
gmpy2 = pytest.importorskip("gmpy2")

from polyconv.engines import _intpack, _pyints  # noqa: E402
from polyconv.engines import jit_state as jit  # noqa: E402
from polyconv.engines import ntt_compiled as nc  # noqa: E402


@pytest.fixture(scope="module")
def streams():
    """The stream kernels, loaded and checked once (skipped where the kernels cannot run)."""
    try:
        jit.kernels()
    except jit.JitUnavailableError as exc:
        pytest.skip(str(exc))
    module = _pyints.ready()
    assert module is not None  # CPython's marshal format read back as written
    return module


def _values(rng: random.Random, bits: int, signed: bool) -> list[int]:
    """Random values of every bit length up to ``bits`` and the edges of each (common practice,
    no source): powers of two and their neighbours, where digit counts and signs change."""
    out = [0, 1]
    for b in range(1, bits):
        for v in (1 << b, (1 << b) - 1, (1 << b) + 1, rng.getrandbits(b)):
            out.append(v)
            if signed:
                out.append(-v)
    limit = 1 << (bits - 1 if signed else bits)
    out = [v for v in out if (-limit <= v < limit if signed else 0 <= v < limit)]
    out += [limit - 1] + ([-limit] if signed else [])
    rng.shuffle(out)
    return out


def _rows(values: list[int], width: int, signed: bool) -> np.ndarray:
    # reference encoding: Python's int.to_bytes
    data = b"".join(v.to_bytes(width, "little", signed=signed) for v in values)
    return np.frombuffer(data, dtype=np.uint8).reshape(len(values), width)


@pytest.mark.parametrize("width", [1, 3, 4, 5, 8, 9, 15, 16, 17, 20, 33, 64, 65, 126])
@pytest.mark.parametrize("signed", [True, False])
def test_rows_stream_matches_from_bytes(streams, width, signed):
    values = _values(random.Random(width), 8 * width, signed)
    rows = _rows(values, width, signed)
    got = _pyints.rows_to_objects(rows, signed)
    # reference: int.from_bytes on each row
    assert got.dtype == object
    assert got.tolist() == [int.from_bytes(r.tobytes(), "little", signed=signed) for r in rows]
    assert got.tolist() == values
    assert all(type(v) is int for v in got)
    assert _intpack.rows_to_ints(rows, signed).tolist() == values


@pytest.mark.parametrize("width", [2, 8, 16, 31, 64])
def test_rows_stream_adds_slot_borrows(streams, width):
    # Kronecker slots: slot k stands for signed(slot k) + topbit(slot k - 1)
    # (the rule _intpack.unpack_signed documents; reference computed here with Python ints)
    values = _values(random.Random(100 + width), 8 * width, True)
    rows = _rows(values, width, True)
    expected = [v + (1 if k and rows[k - 1, -1] >= 0x80 else 0) for k, v in enumerate(values)]
    assert _pyints.rows_to_objects(rows, True, borrowed=True).tolist() == expected


def test_kronecker_unpack_through_streams_matches_python(streams):
    # unpack_signed of a packed integer: reference is the sum of the slots built with Python ints
    rng = random.Random(7)
    for width in (9, 16, 24, 40):
        coeffs = [rng.randrange(-(2**(8 * width - 2)), 2**(8 * width - 2)) for _ in range(300)]
        coeffs[-1] = -abs(coeffs[-1]) - 1  # a negative packed integer
        z = sum(c << (8 * width * k) for k, c in enumerate(coeffs))
        assert _intpack.unpack_signed(gmpy2.mpz(z), width, len(coeffs)).tolist() == coeffs


@pytest.mark.parametrize("bits", [1, 7, 31, 32, 33, 63, 64, 65, 127, 128, 300, 1000])
def test_values_to_rows_matches_to_bytes(streams, bits):
    values = _values(random.Random(bits), bits + 1, True)
    rows = _pyints.values_to_rows(values)
    # reference: the narrowest width holding max(v, -v - 1), then int.to_bytes
    top = max(max(v, -v - 1).bit_length() for v in values)
    assert rows.shape == (len(values), top // 8 + 1)
    assert (rows == _rows(values, top // 8 + 1, True)).all()
    x = np.empty(len(values), dtype=object)
    x[:] = values
    assert (_intpack.values_to_rows(x) == rows).all()


def test_values_to_rows_declines_what_is_not_a_plain_int(streams):
    # bools, numpy scalars and mpz are not marshalled as ints: the portable route takes them
    assert _pyints.values_to_rows([True, 2]) is None
    assert _pyints.values_to_rows([np.int64(3)]) is None
    assert _pyints.values_to_rows([gmpy2.mpz(3)]) is None
    x = np.array([gmpy2.mpz(-5), gmpy2.mpz(2**70)], dtype=object)
    assert _intpack.rows_to_values(_intpack.values_to_rows(x)).tolist() == [-5, 2**70]


def test_from_words128_matches_python(streams):
    # reference: h 2^64 + l with h read as a signed 64-bit word
    rng = np.random.default_rng(3)
    high = rng.integers(-2**63, 2**63, 500, dtype=np.int64)
    high[:4] = [0, -1, 2**63 - 1, -2**63]
    low = rng.integers(0, 2**64, 500, dtype=np.uint64)
    low[:4] = [0, 2**64 - 1, 5, 0]
    expected = [(int(h) << 64) + int(v) for h, v in zip(high, low, strict=True)]
    assert _pyints.from_words128(high, low).tolist() == expected


def test_garner_stream_every_size_and_sign(streams):
    # reference: the CRT with Python ints, shifted into (-P/2, P/2]  (Knuth TAOCP 2, 4.3.2)
    rng = random.Random(11)
    for k in (1, 2, 4, 7, 13):
        primes = tuple(p for p, _, _ in nc.PRIMES[:k])
        total = math.prod(primes)
        values = [v for v in _values(rng, total.bit_length(), True) if abs(v) <= total // 2]
        values += [total // 2, -(total // 2)]
        res = np.array([[v % p for v in values] for p in primes], dtype=np.int64)
        assert nc.recombine(res, primes, as_int64=False).tolist() == values
        small = [v for v in values if abs(v) < 2**63]
        res64 = np.array([[v % p for v in small] for p in primes], dtype=np.int64)
        assert nc.recombine(res64, primes, as_int64=True).tolist() == small


def test_portable_routes_when_kernels_are_not_loaded(streams, monkeypatch):
    # with the kernels "not loaded" the callers keep their own routes: same values
    # (reference: int.from_bytes / int.to_bytes)
    monkeypatch.setattr(jit, "state", lambda: "cached")
    assert _pyints.ready() is None
    values = _values(random.Random(5), 130, True)
    rows = _rows(values, 17, True)
    assert _pyints.rows_to_objects(rows, True) is None
    assert _intpack.rows_to_ints(rows, True).tolist() == values
    x = np.empty(len(values), dtype=object)
    x[:] = values
    assert (_intpack.values_to_rows(x) == rows).all()
    high = np.array([-1, 3], dtype=np.int64)
    low = np.array([7, 2**64 - 1], dtype=np.uint64)
    assert _pyints.from_words128(high, low).tolist() == [-(2**64) + 7, 3 * 2**64 + 2**64 - 1]


def test_garner_words_route_when_streams_are_unavailable(streams, monkeypatch):
    # recombine falls back to Garner words + int.from_bytes; reference: the Python-int CRT
    primes = tuple(p for p, _, _ in nc.PRIMES[:5])
    total = math.prod(primes)
    values = [v for v in _values(random.Random(9), total.bit_length(), True)
              if abs(v) <= total // 2]
    res = np.array([[v % p for v in values] for p in primes], dtype=np.int64)
    monkeypatch.setattr(_pyints, "ready", lambda: None)
    assert nc.recombine(res, primes, as_int64=False).tolist() == values
