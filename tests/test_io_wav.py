"""WAV files from outside writers, read by open_records and checked sample by sample.

Writers: the standard library's ``wave`` module (24-bit PCM), and headers packed by hand
with ``struct`` from the published layouts:

* RIFF/WAVE: Microsoft Corporation and IBM Corporation (1991), "Multimedia Programming
  Interface and Data Specifications 1.0", the WAVE form: a ``RIFF`` chunk of form type
  ``WAVE`` holding a ``fmt `` chunk (wFormatTag, nChannels, nSamplesPerSec,
  nAvgBytesPerSec, nBlockAlign, wBitsPerSample, then cbSize for non-PCM formats), an
  optional ``fact`` chunk (required for non-PCM formats) and a ``data`` chunk of
  interleaved frames; chunks are padded to an even length. Format tags: 1 PCM,
  3 IEEE float, 6 A-law. PCM samples of 8 bits are unsigned (128 is zero), wider ones
  are two's-complement signed.
* WAVE_FORMAT_EXTENSIBLE: Microsoft, "Multiple channel audio data and WAVE files"
  (WAVEFORMATEXTENSIBLE): wFormatTag 0xFFFE, cbSize 22, then wValidBitsPerSample,
  dwChannelMask and the SubFormat GUID (KSDATAFORMAT_SUBTYPE_PCM
  00000001-0000-0010-8000-00AA00389B71, KSDATAFORMAT_SUBTYPE_IEEE_FLOAT
  00000003-0000-0010-8000-00AA00389B71); valid bits narrower than the container sit in
  its most significant bits.

Expected values: sample / full scale * calibration, with full scale 2**(bits-1) for
signed PCM of the container's width and 1.0 for IEEE float (the WAVE conventions above).
"""

from __future__ import annotations

import struct
import wave

import numpy as np
import pytest

from modalnb._errors import RecordError
from modalnb.io import open_records

RATE = 4000
N = 48  # frames; a record needs at least 16 samples


def _chunk(cid: bytes, payload: bytes) -> bytes:
    """A RIFF chunk: 4-byte id, little-endian uint32 size, payload, pad byte if odd."""
    return cid + struct.pack("<I", len(payload)) + payload + (b"\x00" if len(payload) % 2 else b"")


def _riff_wave(*chunks: bytes) -> bytes:
    body = b"WAVE" + b"".join(chunks)
    return b"RIFF" + struct.pack("<I", len(body)) + body


def _fmt(tag: int, n_ch: int, bits: int, *, cb_size: int | None = None) -> bytes:
    """The WAVEFORMATEX fields (cbSize only when given, as for non-PCM formats)."""
    block = n_ch * bits // 8
    out = struct.pack("<HHIIHH", tag, n_ch, RATE, RATE * block, block, bits)
    return out if cb_size is None else out + struct.pack("<H", cb_size)


def _guid(data1: int) -> bytes:
    """KSDATAFORMAT_SUBTYPE_* GUID {data1-0000-0010-8000-00AA00389B71}, as stored (LE)."""
    return struct.pack("<IHH", data1, 0x0000, 0x0010) + bytes.fromhex("800000aa00389b71")


def _fmt_extensible(n_ch: int, bits: int, valid_bits: int, subformat: int) -> bytes:
    head = _fmt(0xFFFE, n_ch, bits, cb_size=22)
    mask = (1 << n_ch) - 1  # SPEAKER_FRONT_LEFT | SPEAKER_FRONT_RIGHT | ...
    return head + struct.pack("<HI", valid_bits, mask) + _guid(subformat)


def _ints(rng: np.random.Generator, bits: int, n_ch: int) -> np.ndarray:
    """Random signed samples that include both ends of the range and zero."""
    lo, hi = -(2 ** (bits - 1)), 2 ** (bits - 1) - 1
    v = rng.integers(lo, hi, size=(N, n_ch), endpoint=True)
    v[0, :], v[1, :], v[2, :] = lo, hi, 0
    return v


def _write(tmp_path, name: str, content: bytes):
    path = tmp_path / name
    path.write_bytes(content)
    return path


def test_24bit_pcm_written_by_stdlib_wave(tmp_path):
    rng = np.random.default_rng(24)
    ints = _ints(rng, 24, 3)
    path = tmp_path / "rec24.wav"
    with wave.open(str(path), "wb") as w:  # independent writer: the standard library's wave
        w.setnchannels(3)
        w.setsampwidth(3)
        w.setframerate(RATE)
        w.writeframes(b"".join(int(x).to_bytes(3, "little", signed=True) for x in ints.ravel()))
    ds = open_records(
        path, calibration=[50.0, 20.0], force_channel=2, force_calibration=2000.0
    )
    # 24-bit signed PCM: full scale 2**23 (RIFF WAVE, Microsoft/IBM 1991)
    np.testing.assert_array_equal(ds["response"].values[0, 0], ints[:, 0] / 2**23 * 50.0)
    np.testing.assert_array_equal(ds["response"].values[0, 1], ints[:, 1] / 2**23 * 20.0)
    np.testing.assert_array_equal(ds["force"].values[0], ints[:, 2] / 2**23 * 2000.0)
    assert ds["response"].values[0, 0, 0] == -50.0  # -2**23 counts is -full scale exactly
    assert ds["channel"].values.tolist() == ["ch1", "ch2"]
    np.testing.assert_array_equal(ds["time"].values, np.arange(N) / RATE)  # frame k at k/rate


@pytest.mark.parametrize(
    ("bits", "valid_bits"),
    [(16, 16), (24, 24), (32, 24), (32, 32)],  # (32, 24): 24 valid bits in a 32-bit container
)
def test_extensible_pcm_packed_by_hand(tmp_path, bits, valid_bits):
    rng = np.random.default_rng(bits + valid_bits)
    ints = _ints(rng, valid_bits, 2)
    # valid bits sit in the most significant bits of the container (WAVEFORMATEXTENSIBLE)
    stored = ints * 2 ** (bits - valid_bits)
    data = b"".join(int(x).to_bytes(bits // 8, "little", signed=True) for x in stored.ravel())
    content = _riff_wave(
        _chunk(b"fmt ", _fmt_extensible(2, bits, valid_bits, subformat=1)),
        _chunk(b"data", data),
    )
    path = _write(tmp_path, "ext.wav", content)
    ds = open_records(path, calibration=[3.0, 7.0], channels=["a", "b"])
    # sample / 2**(container bits - 1) * calibration == valid-bit value / 2**(valid bits - 1)
    np.testing.assert_array_equal(ds["response"].values[0, 0], ints[:, 0] / 2 ** (valid_bits - 1) * 3.0)
    np.testing.assert_array_equal(ds["response"].values[0, 1], ints[:, 1] / 2 ** (valid_bits - 1) * 7.0)
    assert ds.attrs["sample_rate"] == RATE


@pytest.mark.parametrize(("bits", "dtype"), [(32, "<f4"), (64, "<f8")])
@pytest.mark.parametrize("header", ["ieee_float", "extensible"])
def test_ieee_float_packed_by_hand(tmp_path, bits, dtype, header):
    rng = np.random.default_rng(bits)
    x = rng.uniform(-1.0, 1.0, size=(N, 2)).astype(dtype)
    x[0] = [-1.0, 1.0]  # float full scale is +-1.0
    if header == "ieee_float":
        fmt = _fmt(3, 2, bits, cb_size=0)  # WAVE_FORMAT_IEEE_FLOAT, no extra bytes
    else:
        fmt = _fmt_extensible(2, bits, bits, subformat=3)
    content = _riff_wave(
        _chunk(b"fmt ", fmt),
        _chunk(b"fact", struct.pack("<I", N)),  # dwSampleLength, required for non-PCM
        _chunk(b"LIST", b"INFOISFT\x03\x00\x00\x00ab\x00"),  # odd size: one pad byte follows
        _chunk(b"data", x.tobytes()),
    )
    path = _write(tmp_path, "float.wav", content)
    ds = open_records(path, calibration=10.0, force_channel=0, force_calibration=500.0)
    x64 = x.astype(np.float64)
    np.testing.assert_array_equal(ds["force"].values[0], x64[:, 0] * 500.0)
    np.testing.assert_array_equal(ds["response"].values[0, 0], x64[:, 1] * 10.0)
    assert ds["force"].values[0, 0] == -500.0 and ds["response"].values[0, 0, 0] == 10.0
    assert ds["channel"].values.tolist() == ["ch2"]  # WAV channel 2 (1-based) is the response


def test_16bit_pcm_packed_by_hand_with_odd_chunk_before_data(tmp_path):
    rng = np.random.default_rng(16)
    ints = _ints(rng, 16, 1)
    content = _riff_wave(
        _chunk(b"fmt ", _fmt(1, 1, 16)),  # plain PCM: 16-byte fmt chunk, no cbSize
        _chunk(b"LIST", b"INFOabc"),  # 7 bytes + pad byte
        _chunk(b"data", ints.astype("<i2").tobytes()),
    )
    ds = open_records(_write(tmp_path, "pcm.wav", content), calibration=2.0)
    np.testing.assert_array_equal(ds["response"].values[0, 0], ints[:, 0] / 2**15 * 2.0)


def test_a_law_is_refused_in_one_line(tmp_path):
    # format tag 6 = A-law (companded, not linear PCM): not read, with a one-line reason
    content = _riff_wave(
        _chunk(b"fmt ", _fmt(6, 1, 8, cb_size=0)),
        _chunk(b"fact", struct.pack("<I", N)),
        _chunk(b"data", bytes(N)),
    )
    path = _write(tmp_path, "alaw.wav", content)
    with pytest.raises(RecordError, match="WAV sample format not supported") as info:
        open_records(path, calibration=1.0)
    msg = str(info.value)
    assert msg.startswith(str(path)) and "\n" not in msg and "ALAW" in msg
