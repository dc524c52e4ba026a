"""Reference rotation matrices for dsp-core/tests/sh_rotation.rs, from SciPy.

Fieldglass's rotation is R = Rz(yaw) . P(pitch) . Rx(roll) in axes x front, y left, z up, where
P(pitch) is the right-handed rotation about y by -pitch (so a positive pitch lifts the front).
In SciPy's terms that is the intrinsic 'ZYX' sequence with angles (yaw, -pitch, roll).

Run: python tests/reference-scripts/rotation_matrices.py  (SciPy 1.14 was used)
"""

import scipy
from scipy.spatial.transform import Rotation

CASES = [(30.0, 0.0, 0.0), (-45.0, 20.0, 0.0), (12.5, -33.0, 71.0), (170.0, 65.0, -120.0)]

print(f"// scipy {scipy.__version__}: Rotation.from_euler('ZYX', [yaw, -pitch, roll], degrees=True)")
for yaw, pitch, roll in CASES:
    m = Rotation.from_euler("ZYX", [yaw, -pitch, roll], degrees=True).as_matrix()
    rows = ", ".join("[" + ", ".join(f"{v:.15e}" for v in row) + "]" for row in m)
    print(f"(({yaw:.1f}, {pitch:.1f}, {roll:.1f}), [{rows}]),")
