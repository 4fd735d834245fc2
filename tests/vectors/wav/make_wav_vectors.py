#!/usr/bin/env python3
"""2-channel IQ WAV files written by libsndfile (through the `soundfile`
package), for iqaudit's WAV reader tests (tests/integration/wav_edges.rs).

Writes here, in tests/vectors/wav/:
- float64.wav        RIFF/WAVE, 64-bit IEEE float (format tag 3)
- rf64-float32.wav   RF64 (EBU Tech 3306), 32-bit float
- rf64-pcm16.wav     RF64, 16-bit PCM
- wavex-pcm24.wav    WAVE_FORMAT_EXTENSIBLE, 24-bit PCM
- bw64-pcm24.wav     rf64 24-bit PCM with the RF64 tag changed to BW64: ITU-R
                     BS.2088 BW64 has the RF64 layout (libsndfile writes no BW64)
and expected.json: per file, the frame count and the mean power
mean(I^2 + Q^2) computed by numpy (float64) from what soundfile reads back.

Versions used for the committed files: soundfile 0.14.0, libsndfile 1.2.2,
numpy 2.4.6, python 3.11.
Run from the repository root:  python3 tests/vectors/wav/make_wav_vectors.py
"""
import json
import os

import numpy as np
import soundfile as sf

HERE = os.path.dirname(os.path.abspath(__file__))
RATE = 48_000
N = 400

FILES = [
    ("float64.wav", "WAV", "DOUBLE"),
    ("rf64-float32.wav", "RF64", "FLOAT"),
    ("rf64-pcm16.wav", "RF64", "PCM_16"),
    ("wavex-pcm24.wav", "WAVEX", "PCM_24"),
    ("bw64-pcm24.wav", "RF64", "PCM_24"),
]


def main():
    rng = np.random.default_rng(48000)
    n = np.arange(N)
    iq = 0.5 * np.exp(2j * np.pi * 0.0123 * n) + 0.05 * (
        rng.standard_normal(N) + 1j * rng.standard_normal(N)
    )
    frames = np.stack([iq.real, iq.imag], axis=1)
    expected = {"soundfile_version": sf.__version__,
                "libsndfile_version": sf.__libsndfile_version__,
                "numpy_version": np.__version__, "sample_rate_hz": RATE, "files": {}}
    for name, fmt, subtype in FILES:
        path = os.path.join(HERE, name)
        sf.write(path, frames, RATE, format=fmt, subtype=subtype)
        if name.startswith("bw64"):
            with open(path, "r+b") as f:
                assert f.read(4) == b"RF64"
                f.seek(0)
                f.write(b"BW64")
        with open(path, "rb") as f:
            tag = f.read(4).decode()
        if name.startswith("bw64"):
            # libsndfile does not read the BW64 tag: read the same bytes as RF64.
            with open(path, "rb") as f:
                b = bytearray(f.read())
            b[0:4] = b"RF64"
            tmp = path + ".rf64.wav"
            with open(tmp, "wb") as f:
                f.write(b)
            data, rate = sf.read(tmp, dtype="float64")
            os.remove(tmp)
        else:
            data, rate = sf.read(path, dtype="float64")
        assert rate == RATE and data.shape == (N, 2), (name, data.shape)
        expected["files"][name] = {
            "tag": tag,
            "subtype": subtype,
            "frames": int(data.shape[0]),
            "mean_power": float(np.mean(data[:, 0] ** 2 + data[:, 1] ** 2)),
        }
    with open(os.path.join(HERE, "expected.json"), "w") as f:
        json.dump(expected, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
