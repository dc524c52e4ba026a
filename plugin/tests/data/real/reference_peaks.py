#!/usr/bin/env python3
"""Reference directions for `plugin/tests/real_material.rs`: the peak of the whole-file,
full-band max-rE power map of speech.wav played in each room, computed with NumPy/SciPy.

The material is built as the test builds it: the first 6 s of the speech, each room response high-passed at 20 Hz (first
order), the speech resampled to the room's rate (here with SciPy's polyphase resampler, in the
test with a windowed-sinc one), convolved, and the map p(d) = (w*y(d))' R (w*y(d)) evaluated on a
0.25 degree grid, with R the broadband covariance of the SN3D channels (equal to the sum over
all frequency bins of the real cross-spectra), y the SN3D harmonics (table in make_rooms.py) and
w_n = P_n(r_E), r_E the largest root of the Legendre polynomial P_(N+1) (max-rE weights).

    python3 plugin/tests/data/real/reference_peaks.py plugin/tests/data/real

Needs only NumPy and SciPy (made with numpy 1.26.4, scipy 1.14.1; no room simulator); takes
about ten seconds.
"""

import math
import struct
import sys
import wave
from pathlib import Path

import numpy as np
from numpy.polynomial import legendre
from scipy.signal import fftconvolve, lfilter, resample_poly

sys.path.insert(0, str(Path(__file__).parent))
from make_rooms import sn3d_table  # noqa: E402  (plain function, no simulator import needed)

SPEECH_SECONDS = 6.0  # the test uses the first two phrases only
ROOMS = [("room_o3_48k.wav", 48000, 3), ("room_o1_44k1.wav", 44100, 1),
         ("room_o2_96k.wav", 96000, 2)]


def read_float_wav(path):
    data = path.read_bytes()
    channels = struct.unpack_from("<H", data, 22)[0]
    at = data.index(b"data") + 8
    size = struct.unpack_from("<I", data, at - 4)[0]
    return np.frombuffer(data[at:at + size], "<f4").reshape(-1, channels).astype(float)


def max_re_weights(order):
    r_e = max(legendre.legroots([0] * (order + 1) + [1]))
    return np.array([legendre.legval(r_e, [0] * n + [1]) for n in range(order + 1)
                     for _ in range(2 * n + 1)])


def main(folder):
    with wave.open(str(folder / "speech.wav")) as w:
        speech_rate = w.getframerate()
        speech = np.frombuffer(w.readframes(w.getnframes()), "<i2") / 32768.0
    speech = speech[: int(SPEECH_SECONDS * speech_rate)]
    for name, rate, order in ROOMS:
        rirs = read_float_wav(folder / name)
        a = 1.0 / (1.0 + 2.0 * math.pi * 20.0 / rate)
        rirs = lfilter([a, -a], [1.0, -a], rirs, axis=0)
        g = math.gcd(rate, speech_rate)
        voice = resample_poly(speech, rate // g, speech_rate // g)
        sig = np.stack([fftconvolve(voice, rirs[:, c]) for c in range(rirs.shape[1])], 1)
        cov = sig.T @ sig
        weights = max_re_weights(order)
        best = (-1.0, 0.0, 0.0)
        azimuths = np.radians(np.arange(-179.75, 180.001, 0.25))
        for el in np.arange(-90.0, 90.001, 0.25):
            e = math.radians(el)
            y = sn3d_table(order, math.cos(e) * np.cos(azimuths), math.cos(e) * np.sin(azimuths),
                           math.sin(e) + 0.0 * azimuths) * weights[:, None]
            p = np.einsum("ia,ij,ja->a", y, cov, y)
            k = int(np.argmax(p))
            if p[k] > best[0]:
                best = (p[k], math.degrees(azimuths[k]), el)
        print(f"{name}: max-rE full-band map peak at azimuth {best[1]:.2f} deg, "
              f"elevation {best[2]:.2f} deg")


if __name__ == "__main__":
    main(Path(sys.argv[1]))
