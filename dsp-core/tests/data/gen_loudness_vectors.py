#!/usr/bin/env python3
"""Reference vectors for dsp-core/tests/loudness_reference.rs.

Each signal is a recipe (segments of sums of sines plus deterministic noise) that the Rust test
rebuilds sample for sample. For every signal this script stores the integrated loudness from
pyloudnorm (PyPI `pyloudnorm`, an implementation of ITU-R BS.1770-4):
  - filter_class="K-weighting" (pyloudnorm's default: RBJ-cookbook shelf G = 4 dB, Q = 1/sqrt 2,
    fc = 1500 Hz and high-pass Q = 0.5, fc = 38 Hz -- an approximation of the BS.1770 filter);
  - filter_class="DeMan" (the BS.1770 design parameters Vh, Vb, Q, fc with the same bilinear
    design formulas as ours, so it matches the Recommendation's 48 kHz table).
and a third value from a plain SciPy computation (scipy.signal.lfilter with our filter design --
the 48 kHz tables moved to the rate by the matched z-transform -- and an exact list of gating
blocks) as a cross-check of the histogram gating.

Noise: 64-bit LCG state = state * 6364136223846793005 + 1442695040888963407 (mod 2^64), seeded
per segment with `seed`; sample = 2 * (state >> 11) / 2^53 - 1 (uniform in [-1, 1)), advanced
once before each sample.
Sample n (from the segment start) = sum a * sin(2*pi*f*n/fs + p) + noise_amp * noise, rounded to
float32 (the Rust meter takes f32).

Run: python3 gen_loudness_vectors.py  (writes loudness_vectors.txt beside this script)
"""
import os

import numpy as np
import pyloudnorm
import scipy.signal

MASK = (1 << 64) - 1
LCG_MUL = 6364136223846793005
LCG_ADD = 1442695040888963407

# name, sample rate, segments: (duration_s, noise_amp, noise_seed, [(freq_hz, amp, phase_rad)])
SIGNALS = [
    ("sine_997_minus18", 48000, [(10.0, 0.0, 0, [(997.0, 0.125, 0.0)])]),
    ("multitone", 48000, [(8.0, 0.0, 0, [(60.0, 0.3, 0.0), (440.0, 0.2, 1.0),
                                           (3150.0, 0.1, 2.0), (12000.0, 0.05, 0.5)])]),
    ("white_noise", 48000, [(10.0, 0.25, 12345, [])]),
    ("loud_then_quiet", 48000, [
        (5.0, 0.05, 7, [(1000.0, 0.5, 0.0)]),
        (10.0, 0.0, 0, [(1000.0, 0.01, 0.0)]),       # about -40 dB: below the relative gate
        (5.0, 0.0, 0, [(220.0, 0.2, 0.0), (2500.0, 0.15, 0.3)]),
    ]),
    ("noise_silence_tone", 48000, [
        (4.0, 0.1, 99, []),
        (6.0, 0.0, 0, []),                           # digital silence: absolute gate
        (4.0, 0.0, 0, [(1000.0, 0.2, 0.0)]),
    ]),
    ("level_steps", 48000, [
        (2.0, 0.02, 1, [(250.0, 0.1, 0.0)]),
        (2.0, 0.01, 2, [(250.0, 0.05, 0.0)]),
        (2.0, 0.005, 3, [(250.0, 0.025, 0.0)]),
        (2.0, 0.0025, 4, [(250.0, 0.0125, 0.0)]),
        (2.0, 0.0, 0, [(250.0, 0.004, 0.0)]),
    ]),
    ("mix_44k1", 44100, [
        (6.0, 0.08, 4242, [(100.0, 0.2, 0.0), (1000.0, 0.15, 0.7), (8000.0, 0.05, 1.3)]),
        (3.0, 0.0, 0, [(500.0, 0.02, 0.0)]),
        (3.0, 0.2, 777, []),
    ]),
]


def lcg_noise(seed, count):
    state = seed & MASK
    out = np.empty(count)
    scale = 1.0 / float(1 << 53)
    for i in range(count):
        state = (state * LCG_MUL + LCG_ADD) & MASK
        out[i] = 2.0 * ((state >> 11) * scale) - 1.0
    return out


def synthesise(fs, segments):
    parts = []
    for duration_s, noise_amp, seed, sines in segments:
        count = int(round(duration_s * fs))
        n = np.arange(count, dtype=np.float64)
        x = np.zeros(count)
        for f, a, p in sines:
            x += a * np.sin(2.0 * np.pi * f * n / fs + p)
        if noise_amp != 0.0:
            x += noise_amp * lcg_noise(seed, count)
        parts.append(x)
    return np.concatenate(parts).astype(np.float32).astype(np.float64)


# ITU-R BS.1770-4 Tables 1 and 2 (48 kHz).
SHELF_48K = ([1.53512485958697, -2.69169618940638, 1.19839281085285],
             [1.0, -1.69065929318241, 0.73248077421585])
HIGH_PASS_48K = ([1.0, -2.0, 1.0], [1.0, -1.99004745483398, 0.99007225036621])


def matched_rate(table, fs, z_gain):
    """The 48 kHz table filter at rate fs by the matched z-transform (roots z -> z**(48000/fs)),
    gain set so that H(z_gain) equals the table's (1: DC, -1: high-frequency end). This is the
    derivation dsp-core's KWeighting uses, written independently with numpy.roots."""
    b, a = (np.asarray(c, dtype=float) for c in table)
    ratio = 48000.0 / fs
    nb = np.real(np.poly(np.roots(b).astype(complex) ** ratio))
    na = np.real(np.poly(np.roots(a).astype(complex) ** ratio))
    target = np.polyval(b[::-1], 1.0 / z_gain) / np.polyval(a[::-1], 1.0 / z_gain)
    nb *= target / (np.polyval(nb[::-1], 1.0 / z_gain) / np.polyval(na[::-1], 1.0 / z_gain))
    return list(nb), list(na)


def bs1770_design(fs):
    return matched_rate(SHELF_48K, fs, 1.0), matched_rate(HIGH_PASS_48K, fs, -1.0)


def scipy_exact_integrated(x, fs):
    (sb, sa), (hb, ha) = bs1770_design(fs)
    y = scipy.signal.lfilter(hb, ha, scipy.signal.lfilter(sb, sa, x))
    step = int(round(0.1 * fs))
    block = 4 * step
    z = np.array([np.mean(y[j * step:j * step + block] ** 2)
                  for j in range((len(y) - block) // step + 1)])
    with np.errstate(divide="ignore"):
        l = -0.691 + 10 * np.log10(z)
    z_abs = z[l > -70.0]
    gamma_r = -0.691 + 10 * np.log10(np.mean(z_abs)) - 10.0
    z_rel = z[(l > -70.0) & (l > gamma_r)]
    return -0.691 + 10 * np.log10(np.mean(z_rel))


# The BS.1770-4 anchor (0 dBFS 997 Hz sine, 4 s) at every rate the task names.
ANCHOR_RATES = [22050, 32000, 44100, 48000, 88200, 96000, 176400, 192000, 352800, 384000]


def anchor_lines():
    lines = []
    for fs in ANCHOR_RATES:
        n = np.arange(4 * fs, dtype=np.float64)
        x = np.sin(2 * np.pi * 997.0 * n / fs).astype(np.float32).astype(np.float64)
        exact = scipy_exact_integrated(x, fs)
        kw = pyloudnorm.Meter(fs).integrated_loudness(x)
        deman = pyloudnorm.Meter(fs, filter_class="DeMan").integrated_loudness(x)
        print(f"anchor fs={fs}: SciPy matched {exact:.5f}  pyloudnorm {kw:.5f}  DeMan {deman:.5f}")
        lines.append(f"anchor {fs} {exact:.6f} {kw:.6f} {deman:.6f}")
    return lines


def main():
    lines = [
        "# Generated by gen_loudness_vectors.py (see its docstring). Do not edit.",
        "# signal <name> <fs_hz> <pyloudnorm_kweighting_lufs> <pyloudnorm_deman_lufs> <scipy_exact_lufs>",
        "# segment <duration_s> <noise_amp> <noise_seed> then (<freq_hz> <amp> <phase_rad>)*",
        "# anchor <fs_hz> <scipy_exact_lufs> <pyloudnorm_kweighting_lufs> <pyloudnorm_deman_lufs>"
        " (0 dBFS 997 Hz sine, 4 s)",
        f"# pyloudnorm {pyloudnorm.__version__ if hasattr(pyloudnorm, '__version__') else '0.2.0'}, "
        f"numpy {np.__version__}, scipy {scipy.__version__}",
    ]
    for name, fs, segments in SIGNALS:
        x = synthesise(fs, segments)
        kw = pyloudnorm.Meter(fs).integrated_loudness(x)
        deman = pyloudnorm.Meter(fs, filter_class="DeMan").integrated_loudness(x)
        exact = scipy_exact_integrated(x, fs)
        print(f"{name:20s} fs={fs} K-weighting {kw:.4f}  DeMan {deman:.4f}  scipy {exact:.4f}")
        lines.append(f"signal {name} {fs} {kw:.6f} {deman:.6f} {exact:.6f}")
        for duration_s, noise_amp, seed, sines in segments:
            fields = [f"segment {duration_s!r} {noise_amp!r} {seed}"]
            fields += [f"{f!r} {a!r} {p!r}" for f, a, p in sines]
            lines.append(" ".join(fields))
        lines.append("end")
    lines += anchor_lines()
    path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "loudness_vectors.txt")
    with open(path, "w") as out:
        out.write("\n".join(lines) + "\n")


if __name__ == "__main__":
    main()
