#!/usr/bin/env python3
"""Reference loudness for `plugin/tests/real_material.rs`: integrated loudness (ITU-R BS.1770-4)
of the W channel of the dry-speech test file, computed with pyloudnorm from PyPI.

In the test, W of a single SN3D plane wave is the signal itself: 0.9 times the first 6 s of
speech.wav at 48 kHz. Here the speech is resampled with SciPy's polyphase resampler (the test
uses a windowed-sinc one with a 9.9 kHz cut-off; a 9.9 kHz low-pass changes the figure by
0.002 LU, printed too). The pauses of digital silence fall below the absolute gate.

    /tmp/room-venv/bin/pip install pyloudnorm
    /tmp/room-venv/bin/python plugin/tests/data/real/reference_loudness.py plugin/tests/data/real

Made with pyloudnorm 0.2.0, numpy 1.26.4, scipy 1.14.1.
"""

import math
import sys
import wave
from pathlib import Path

import numpy as np
import pyloudnorm
from scipy.signal import butter, resample_poly, sosfiltfilt

RATE = 48000
GAIN = 0.9
SPEECH_SECONDS = 6.0


def main(folder):
    with wave.open(str(folder / "speech.wav")) as w:
        native = w.getframerate()
        speech = np.frombuffer(w.readframes(w.getnframes()), "<i2") / 32768.0
    speech = speech[: int(SPEECH_SECONDS * native)]
    g = math.gcd(RATE, native)
    w_channel = GAIN * resample_poly(speech, RATE // g, native // g)
    meter = pyloudnorm.Meter(RATE)
    low_passed = sosfiltfilt(butter(12, 9900, fs=RATE, output="sos"), w_channel)
    print(f"W integrated loudness {meter.integrated_loudness(w_channel):.3f} LUFS "
          f"(low-passed at 9.9 kHz: {meter.integrated_loudness(low_passed):.3f} LUFS)")


if __name__ == "__main__":
    main(Path(sys.argv[1]))
