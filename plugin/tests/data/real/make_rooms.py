#!/usr/bin/env python3
"""Spherical-harmonic room impulse responses of shoebox rooms for `plugin/tests/real_material.rs`.

Simulator: `masp` 0.1.0 from PyPI (Multichannel Acoustic Signal Processing, A. Pérez-López; a
Python port of an image-source shoebox room simulator with spherical-harmonic receivers). It uses
`scipy.special.sph_harm`, which newer SciPy removed, so run it in a venv:

    python3 -m venv /tmp/room-venv
    /tmp/room-venv/bin/pip install "masp==0.1.0" "scipy<1.15" "numpy<2"
    /tmp/room-venv/bin/python plugin/tests/data/real/make_rooms.py plugin/tests/data/real

Output: one 32-bit float WAV per room, ACN channel order, SN3D, scaled so that W peaks at 0.5.

Conventions, read from masp's source and checked below on every run:
- Positions are given from the room's floor corner with y running the other way from ours
  (masp's docstring calls it left-handed); masp moves them to the room centre with y flipped,
  so the direction of arrival of the direct path in our convention (x front, y left, z up) is
  (src_x - rec_x, -(src_y - rec_y), src_z - rec_z).
- masp's real spherical harmonics are SciPy's orthonormal ones with the Condon-Shortley phase
  removed, i.e. N3D / sqrt(4 pi); SN3D = that * sqrt(4 pi) / sqrt(2n + 1).
The script checks the converted direct-path gains against the SN3D polynomials written out
below (the real SH table of the AmbiX proposal, Nachbar et al. 2011, written here from memory
and cross-checked numerically against SciPy's `sph_harm` on every run) before writing anything.
"""

import math
import struct
import sys
from pathlib import Path

import numpy as np

# name, rate, order, room (m), source and receiver (masp corner coordinates, m), RT60 per octave
# band 125 Hz .. 8 kHz (s), length kept (s).
ROOMS = [
    ("room_o3_48k", 48000, 3, [6.0, 4.5, 3.0], [4.2, 1.4, 1.7], [2.5, 2.6, 1.4],
     [0.55, 0.5, 0.45, 0.4, 0.35, 0.3], 0.45),
    ("room_o1_44k1", 44100, 1, [9.0, 7.0, 3.5], [2.0, 5.0, 1.6], [5.0, 3.0, 1.5],
     [0.8, 0.7, 0.6, 0.55, 0.5, 0.4], 0.6),
    ("room_o2_96k", 96000, 2, [4.0, 3.5, 2.6], [1.2, 2.9, 2.2], [2.6, 1.5, 1.2],
     [0.35, 0.3, 0.3, 0.25, 0.25, 0.2], 0.3),
]
BAND_CENTRES_HZ = np.array([125.0, 250.0, 500.0, 1000.0, 2000.0, 4000.0])


def sn3d_table(order, x, y, z):
    """Real SN3D spherical harmonics, ACN order, no Condon-Shortley phase, up to order 3."""
    values = [1.0 + 0.0 * x,  # W; broadcasts when x, y, z are arrays
              y, z, x,
              math.sqrt(3) * x * y, math.sqrt(3) * y * z, 0.5 * (3 * z * z - 1),
              math.sqrt(3) * x * z, 0.5 * math.sqrt(3) * (x * x - y * y),
              math.sqrt(5 / 8) * y * (3 * x * x - y * y), math.sqrt(15) * x * y * z,
              math.sqrt(3 / 8) * y * (5 * z * z - 1), 0.5 * z * (5 * z * z - 3),
              math.sqrt(3 / 8) * x * (5 * z * z - 1), 0.5 * math.sqrt(15) * z * (x * x - y * y),
              math.sqrt(5 / 8) * x * (x * x - 3 * y * y)]
    return np.array(values[: (order + 1) ** 2])


def sn3d_scipy(order, azimuth, elevation):
    """The same from SciPy's complex orthonormal harmonics (CS phase removed, SN3D scaling)."""
    from scipy.special import sph_harm  # removed in SciPy 1.17; imported only where used

    out = []
    polar = math.pi / 2 - elevation
    for n in range(order + 1):
        for m in range(-n, n + 1):
            y = sph_harm(abs(m), n, azimuth, polar) * (-1) ** abs(m)
            real = math.sqrt(2) * (y.imag if m < 0 else y.real) if m != 0 else y.real
            out.append(real * math.sqrt(4 * math.pi / (2 * n + 1)))
    return np.array(out)


def masp_to_sn3d(order):
    return np.array([math.sqrt(4 * math.pi / (2 * n + 1))
                     for n in range(order + 1) for _ in range(2 * n + 1)])


def write_float_wav(path, rate, planes):
    """Plain IEEE-float WAV (format tag 3) with a fact chunk, interleaved."""
    channels, frames = planes.shape
    data = planes.T.astype("<f4").tobytes()
    fmt = struct.pack("<HHIIHHH", 3, channels, rate, rate * 4 * channels, 4 * channels, 32, 0)
    body = (b"WAVE" + b"fmt " + struct.pack("<I", len(fmt)) + fmt
            + b"fact" + struct.pack("<II", 4, frames)
            + b"data" + struct.pack("<I", len(data)) + data)
    path.write_bytes(b"RIFF" + struct.pack("<I", len(body)) + body)


def main(out_dir):
    import masp.shoebox_room_sim as srs  # imported here so reference_peaks.py can reuse the table

    for name, rate, order, room, src, rec, rt60, seconds in ROOMS:
        room = np.array(room)
        src = np.array([src])
        rec = np.array([rec])
        alpha, _ = srs.find_abs_coeffs_from_rt(room, np.array(rt60))
        limits = np.array(rt60) * 1.2
        echograms = srs.compute_echograms_sh(room, src, rec, alpha, limits, order)
        direct = echograms[0, 0, 0]
        doa = np.array([src[0, 0] - rec[0, 0], -(src[0, 1] - rec[0, 1]), src[0, 2] - rec[0, 2]])
        assert np.allclose(direct.coords[0], doa), (direct.coords[0], doa)
        unit = doa / np.linalg.norm(doa)
        azimuth = math.atan2(unit[1], unit[0])
        elevation = math.asin(unit[2])
        table = sn3d_table(order, *unit)
        assert np.allclose(table, sn3d_scipy(order, azimuth, elevation), atol=1e-12)
        gains = direct.value[0] * masp_to_sn3d(order)
        gains /= gains[0]
        assert np.allclose(gains, table, atol=1e-9), (gains, table)

        rirs = srs.render_rirs_sh(echograms, BAND_CENTRES_HZ, rate)[:, :, 0, 0]
        rirs = rirs[: int(seconds * rate)] * masp_to_sn3d(order)
        rirs *= 0.5 / np.max(np.abs(rirs[:, 0]))
        write_float_wav(out_dir / f"{name}.wav", rate, rirs.T)
        print(f"{name}: {rirs.shape[1]} ch, {rirs.shape[0]} frames at {rate} Hz; direct path "
              f"azimuth {math.degrees(azimuth):.3f} deg, elevation {math.degrees(elevation):.3f} "
              f"deg, {np.linalg.norm(doa):.3f} m", file=sys.stderr)


if __name__ == "__main__":
    main(Path(sys.argv[1]))
