"""Makes the BW64 + ADM fixtures in plugin/tests/data/adm/ with the EBU ADM Renderer (PyPI `ear`,
2.1.0), a reference implementation of ITU-R BS.2127 whose `ear-utils ambix_to_bwf` writes HOA
files with `chna` and `axml` (or `chna` alone, referencing the ITU-R BS.2094 common
definitions). The scene is encoded with ear's own spherical harmonics (`ear.core.hoa.sph_harm`),
not ours: three uncorrelated noise sources at first order, 1 s at 48 kHz, 16-bit.

Run only to regenerate (needs `pip install ear`):
    python tests/reference-scripts/make_adm_fixtures.py plugin/tests/data/adm
"""
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
from scipy.io import wavfile
from ear.core.hoa import from_acn, norm_N3D, norm_SN3D, sph_harm

RATE = 48_000
# (azimuth, elevation) in degrees, azimuth counter-clockwise from the front.
SOURCES = [(30.0, 10.0), (-100.0, 40.0), (160.0, -20.0)]


def encode(norm, order=1, seconds=1.0, seed=7):
    rng = np.random.default_rng(seed)
    n, m = from_acn(np.arange((order + 1) ** 2))
    out = np.zeros(((order + 1) ** 2, int(RATE * seconds)))
    for az, el in SOURCES:
        gains = sph_harm(n, m, np.radians(az), np.radians(el), norm=norm)
        out += np.outer(gains, 0.06 * rng.standard_normal(out.shape[1]))
    return (np.clip(out.T, -1, 1) * 32767).round().astype(np.int16)


def main(target):
    target = Path(target)
    target.mkdir(parents=True, exist_ok=True)
    cases = [
        ("ear-order1-n3d.wav", norm_N3D, ["--norm", "N3D"]),
        ("ear-order1-n3d-common.wav", norm_N3D, ["--norm", "N3D", "--chna-only"]),
        ("ear-order1-sn3d-labelled-n3d.wav", norm_SN3D, ["--norm", "N3D"]),
    ]
    with tempfile.TemporaryDirectory() as tmp:
        for name, norm, options in cases:
            ambix = Path(tmp) / "in.wav"
            wavfile.write(ambix, RATE, encode(norm))
            subprocess.run(
                ["ear-utils", "ambix_to_bwf", *options, str(ambix), str(target / name)],
                check=True,
            )
            print("wrote", target / name)


if __name__ == "__main__":
    main(sys.argv[1] if len(sys.argv) > 1 else "plugin/tests/data/adm")
