#!/usr/bin/env python3
"""Reference directions for `plugin/tests/real_material.rs`: the peak of the whole-file,
full-band max-rE power map of speech.wav played in each room, computed with NumPy/SciPy.

The material is built as the test builds it: the first 6 s of the speech, each room response high-passed at 20 Hz (first
order), the speech resampled to the room's rate (here with SciPy's polyphase resampler, in the
test with a windowed-sinc one), convolved, and the map p(d) = (w*y(d))' R (w*y(d)) evaluated on a
0.25 degree grid, with R the broadband covariance of the SN3D channels (equal to the sum over
all frequency bins of the real cross-spectra), y the SN3D harmonics (table in make_rooms.py) and
w_n = P_n(r_E), r_E the largest root of the Legendre polynomial P_(N+1) (max-rE weights).
It prints the peak and how far from it the map stays within 0.01 dB of its maximum.

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

FLAT_DB = 0.01  # how flat the top is: see the note in main()
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
        rows = []  # per elevation: the map along azimuth
        azimuths = np.radians(np.arange(-179.75, 180.001, 0.25))
        elevations = np.arange(-90.0, 90.001, 0.25)
        for el in elevations:
            e = math.radians(el)
            y = sn3d_table(order, math.cos(e) * np.cos(azimuths), math.cos(e) * np.sin(azimuths),
                           math.sin(e) + 0.0 * azimuths) * weights[:, None]
            rows.append(np.einsum("ia,ij,ja->a", y, cov, y))
        level_db = 10.0 * np.log10(np.array(rows))
        row, col = np.unravel_index(np.argmax(level_db), level_db.shape)
        peak_el, peak_az = elevations[row], math.degrees(azimuths[col])
        # How flat the top is: the farthest grid point from the peak whose level is within
        # FLAT_DB of the maximum. Directions inside this radius differ by less than FLAT_DB.
        e0, a0 = math.radians(peak_el), math.radians(peak_az)
        near = level_db >= level_db[row, col] - FLAT_DB
        el_grid = np.radians(elevations)[:, None]
        cos_angle = (np.sin(el_grid) * math.sin(e0)
                     + np.cos(el_grid) * math.cos(e0) * np.cos(azimuths[None, :] - a0))
        radius = math.degrees(np.arccos(np.clip(cos_angle[near], -1.0, 1.0)).max())
        print(f"{name}: max-rE full-band map peak at azimuth {peak_az:.2f} deg, elevation "
              f"{peak_el:.2f} deg; within {FLAT_DB} dB of it up to {radius:.2f} deg away")

if __name__ == "__main__":
    main(Path(sys.argv[1]))
