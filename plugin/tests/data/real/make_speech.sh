#!/usr/bin/env bash
# Makes speech.wav for plugin/tests/real_material.rs: three phrases from Debian's espeak-ng
# (`apt-get install -y espeak-ng`; made with eSpeak NG 1.51), 22050 Hz 16-bit mono, joined with
# pauses of digital silence (exact zero samples): 0.25 s before, 0.6 s between, 0.4 s after.
set -euo pipefail
out_dir="${1:-$(dirname "$0")}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
espeak-ng -v en-gb -s 160 -p 45 -w "$work/1.wav" "The last tram leaves the harbour at seven."
espeak-ng -v en-gb -s 160 -p 60 -w "$work/2.wav" "Two coffees on the terrace, please."
espeak-ng -v en-us -s 150 -p 35 -w "$work/3.wav" "Listen: the bell, then the gulls."
python3 - "$work" "$out_dir/speech.wav" <<'PY'
import sys, wave
work, out = sys.argv[1], sys.argv[2]
rate = 22050
def frames(path):
    with wave.open(path) as w:
        assert (w.getframerate(), w.getnchannels(), w.getsampwidth()) == (rate, 1, 2)
        return w.readframes(w.getnframes())
def zeros(seconds):
    return b"\0\0" * int(seconds * rate)
# espeak-ng's own leading and trailing samples are near zero, not exactly zero: keep them (they
# are part of the material) and put exact digital silence around them.
body = zeros(0.25) + frames(f"{work}/1.wav") + zeros(0.6) + frames(f"{work}/2.wav") \
    + zeros(0.6) + frames(f"{work}/3.wav") + zeros(0.4)
with wave.open(out, "wb") as w:
    w.setnchannels(1); w.setsampwidth(2); w.setframerate(rate); w.writeframes(body)
PY
