"""Checks the rules of plugin/src/adm/common_definitions.rs against the ITU-R BS.2094 table
shipped with the EBU ADM Renderer (PyPI `ear` 2.1.0,
ear/fileio/adm/data/2094_common_definitions.xml): every HOA channel format AC_0004xxxx has the
(order, degree, normalization) the rules give, every track format AT_0004xxxx_01 leads to the
channel format of the same number, and the 3D packs have the stated names and orders.

    pip install ear && python tests/reference-scripts/adm_common_definitions.py
"""
import math
import xml.etree.ElementTree as ET
from pathlib import Path

import ear

NS = {"a": "urn:metadata-schema:adm"}
root = ET.parse(
    Path(ear.__file__).parent / "fileio/adm/data/2094_common_definitions.xml"
).getroot()


def rule(code):
    for base, norm, count in [(0x0001, "SN3D", 121), (0x0101, "N3D", 121), (0x0201, "FuMa", 16)]:
        if base <= code < base + count:
            acn = code - base
            n = math.isqrt(acn)
            return n, acn - n * n - n, norm
    return None


checked = 0
for c in root.iter("{urn:metadata-schema:adm}audioChannelFormat"):
    cid = c.get("audioChannelFormatID")
    if not cid.startswith("AC_0004"):
        continue
    b = c.find("a:audioBlockFormat", NS)
    got = (int(b.find("a:order", NS).text), int(b.find("a:degree", NS).text),
           b.find("a:normalization", NS).text)
    assert rule(int(cid[7:], 16)) == got, (cid, got)
    checked += 1
for t in root.iter("{urn:metadata-schema:adm}audioTrackFormat"):
    tid = t.get("audioTrackFormatID")
    if tid.startswith("AT_0004"):
        assert t.find("a:audioStreamFormatIDRef", NS).text == "AS_" + tid[3:11], tid
for s in root.iter("{urn:metadata-schema:adm}audioStreamFormat"):
    sid = s.get("audioStreamFormatID")
    if sid.startswith("AS_0004"):
        assert s.find("a:audioChannelFormatIDRef", NS).text == "AC_" + sid[3:], sid
for p in root.iter("{urn:metadata-schema:adm}audioPackFormat"):
    pid, name = p.get("audioPackFormatID"), p.get("audioPackFormatName")
    code = int(pid[7:], 16) if pid.startswith("AP_0004") else None
    if code is None or code > 0x23:
        continue
    norm, order = {0: ("SN3D", code), 1: ("N3D", code - 0x10), 2: ("FuMa", code - 0x20)}[code >> 4]
    expected = f"3D_order{order}_FuMa" if norm == "FuMa" else f"3D_order{order}_{norm}_ACN"
    assert name == expected, (pid, name)
print(f"{checked} HOA channel formats and the 3D packs agree with the rules")
