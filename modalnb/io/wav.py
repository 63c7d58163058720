"""WAV record files (``.wav``): multichannel PCM or IEEE-float samples, one hit per file.

WAV samples are digital counts, so a calibration is required. Integer PCM is scaled by
its container's full scale ``2**(bits-1)`` (8-bit PCM is unsigned with 128 as zero),
IEEE float by 1.0 (Microsoft/IBM, 1991, "Multimedia Programming Interface and Data
Specifications 1.0", the WAVE form). Samples narrower than their container (24-bit
samples in 32-bit containers, WAVE_FORMAT_EXTENSIBLE) are stored in the most
significant bits (Microsoft, "Multiple channel audio data and WAVE files"), so the
container's full scale is still the right one. The header is parsed by
:func:`scipy.io.wavfile.read`.
"""

from __future__ import annotations

import struct
import warnings
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from .._errors import RecordError
from ..records import build_records

__all__ = ["read_wav"]


def _per_channel(src: str, name: str, value: Any, n: int) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise RecordError(
            f"{src}: option {name} must be a number or one number per channel."
        ) from None
    if arr.ndim == 0:
        arr = np.full(n, float(arr))
    if arr.shape != (n,):
        raise RecordError(
            f"{src}: option {name} has {arr.size} values for {n} response channels. Hint: give "
            "one value, or one per response channel."
        )
    if not np.all(np.isfinite(arr) & (arr > 0)):
        raise RecordError(
            f"{src}: option {name} must be positive finite numbers (physical units at digital "
            f"full scale), was {value!r}."
        )
    return arr


def _read_samples(path: Path, src: str) -> tuple[float, np.ndarray]:
    """Sample rate and samples (time, wav channel) as fractions of digital full scale."""
    from scipy.io import wavfile

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            rate, data = wavfile.read(path)
        except (ValueError, EOFError, OSError, struct.error) as exc:
            if "Unknown wave file format" in str(exc) or "Unsupported bit depth" in str(exc):
                raise RecordError(
                    f"{src}: WAV sample format not supported ({exc}). Hint: export the "
                    "recording as integer PCM or IEEE-float WAV."
                ) from None
            raise RecordError(f"{src}: not a readable WAV file ({exc}).") from None
    for item in caught:
        if "EOF" in str(item.message):
            raise RecordError(
                f"{src}: the WAV file is truncated ({item.message}). Hint: copy or export it again."
            )
        warnings.warn_explicit(item.message, item.category, item.filename, item.lineno)
    data = np.asarray(data)
    if data.ndim == 1:
        data = data[:, None]
    if data.dtype == np.uint8:
        return float(rate), (data.astype(np.float64) - 128.0) / 128.0
    if data.dtype.kind == "i":
        return float(rate), data.astype(np.float64) / float(2 ** (8 * data.dtype.itemsize - 1))
    if data.dtype.kind == "f":
        return float(rate), data.astype(np.float64)
    raise RecordError(f"{src}: unsupported WAV sample type {data.dtype}.")  # pragma: no cover


def _force_channel(
    src: str, n_wav: int, force_channel: Any, force_calibration: Any
) -> tuple[int | None, float | None]:
    """Index and calibration of the force channel, after checking the two options agree."""
    if force_channel is None:
        if force_calibration is not None:
            raise RecordError(f"{src}: force_calibration is given but force_channel is not.")
        return None, None
    if isinstance(force_channel, bool) or not isinstance(force_channel, int | np.integer):
        raise RecordError(
            f"{src}: option force_channel must be a channel index, was {force_channel!r}."
        )
    if not 0 <= int(force_channel) < n_wav:
        raise RecordError(
            f"{src}: force_channel={force_channel} but the file has {n_wav} channel(s) "
            f"(indices 0..{n_wav - 1})."
        )
    if force_calibration is None:
        raise RecordError(
            f"{src}: force_channel is given but force_calibration is not; pass "
            "force_calibration= (force units at digital full scale)."
        )
    return int(force_channel), float(_per_channel(src, "force_calibration", force_calibration, 1)[0])


def read_wav(
    path: Path,
    src: str,
    head: bytes = b"",
    *,
    calibration: Any = None,
    force_channel: int | None = None,
    force_calibration: float | None = None,
    channels: Sequence[str] | None = None,
    units: str = "m/s^2",
    force_units: str = "N",
) -> xr.Dataset:
    """Read a WAV file as one hit: ``response = samples / full scale * calibration``.

    Examples
    --------
    >>> import numpy as np, tempfile, pathlib
    >>> from scipy.io import wavfile
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "r.wav"
    >>> wavfile.write(p, 1000, np.full((32, 1), 2**14, dtype=np.int16))
    >>> float(read_wav(p, "r.wav", calibration=10.0)["response"][0, 0, 0])
    5.0
    """
    if calibration is None:
        raise RecordError(
            f"{src}: WAV samples are digital counts with no physical units; pass calibration= "
            "(response units at digital full scale: one number, or one per response channel). "
            "Hint: full-scale volts / sensor sensitivity in volts per unit."
        )
    rate, counts = _read_samples(path, src)
    n_t, n_wav = counts.shape
    k_force, force_fs = _force_channel(src, n_wav, force_channel, force_calibration)
    idx = [k for k in range(n_wav) if k != k_force]
    if not idx:
        raise RecordError(f"{src}: the WAV file has no channel left for the response.")
    cal = _per_channel(src, "calibration", calibration, len(idx))
    names = [f"ch{k + 1}" for k in idx] if channels is None else [str(c) for c in channels]
    if len(names) != len(idx):
        raise RecordError(f"{src}: {len(names)} channel names for {len(idx)} response channels.")
    attrs: dict[str, Any] = {"sample_rate": rate}
    force = None
    if k_force is not None and force_fs is not None:
        attrs["force_full_scale"] = force_fs
        force = counts[:, k_force][None, :] * force_fs
    return build_records(
        (counts[:, idx] * cal).T[None, :, :],
        np.arange(n_t) / rate,
        channels=names,
        force=force,
        units=units,
        force_units=force_units,
        channel_coords={"full_scale": cal},
        attrs=attrs,
        source=src,
    )
