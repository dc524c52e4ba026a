"""Reads the ADM metadata of BW64 files with the EBU ADM Renderer's parser (PyPI `ear` 2.1.0,
`ear.fileio.openBw64Adm`) and prints each HOA pack and its tracks' order, degree and
normalization: the outside check of what `fieldglass demo --adm` writes.

    fieldglass demo --write /tmp/d.wav --adm --format fuma
    python tests/reference-scripts/adm_read_with_ear.py /tmp/d.wav
"""
import sys

from ear.fileio import openBw64Adm
from ear.fileio.adm.elements import TypeDefinition

for path in sys.argv[1:]:
    with openBw64Adm(path) as f:
        packs = [
            p
            for p in f.adm.audioPackFormats
            if p.type == TypeDefinition.HOA and not p.is_common_definition
        ]
        for pack in packs:
            print(path, pack.audioPackFormatName)
        for uid in f.adm.audioTrackUIDs:
            block = uid.audioTrackFormat.audioStreamFormat.audioChannelFormat.audioBlockFormats[0]
            print(f"  track {uid.trackIndex}: order {block.order}, degree {block.degree}, "
                  f"{block.normalization}")
