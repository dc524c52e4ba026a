#!/usr/bin/env python3
"""Draws docs/editor-picture.png: an invented equirectangular (2:1) still of the demo scene's
harbour-front terrace at dusk, for the editor's "picture behind the map" screenshot.

Everything is drawn here from simple shapes (no photograph, no downloaded image), placed where
the demo scene puts its sounds (dsp-core/src/scene/mod.rs): the busker front-right (-35 deg),
two people front-left (+30 and +50 deg), the tram on the quay to the left (its pass runs from
+80 to -80 deg), gulls overhead (65-70 deg up), the fountain behind (180 deg, a little below).

Layout as the map's: column c of a W-wide picture shows azimuth 180 - (c + 1/2) * 360 / W
(left of centre is +azimuth, to the left), row r shows elevation 90 - (r + 1/2) * 180 / H.

Usage: python3 docs/make_editor_picture.py [OUT.png] [WIDTH]
"""

import math
import struct
import sys
import zlib


def lerp(a, b, t):
    return tuple(int(round(x + (y - x) * t)) for x, y in zip(a, b))


def write_png(path, width, height, rows):
    raw = b"".join(b"\x00" + bytes(row) for row in rows)

    def chunk(kind, data):
        body = kind + data
        return struct.pack(">I", len(data)) + body + struct.pack(">I", zlib.crc32(body))

    header = struct.pack(">IIBBBBB", width, height, 8, 2, 0, 0, 0)
    with open(path, "wb") as f:
        f.write(b"\x89PNG\r\n\x1a\n")
        f.write(chunk(b"IHDR", header))
        f.write(chunk(b"IDAT", zlib.compress(raw, 9)))
        f.write(chunk(b"IEND", b""))


def azimuth_distance(a, b):
    d = (a - b + 180.0) % 360.0 - 180.0
    return abs(d)


def colour_at(az, el):
    """The scene's colour in direction (azimuth, elevation), degrees."""
    # Sky: deep blue overhead to a warm band at the horizon, warmest towards the sunset at
    # the back-left over the water.
    if el >= 0.0:
        warmth = max(0.0, math.cos(math.radians(az - 140.0))) ** 2
        horizon = lerp((70, 90, 140), (235, 140, 80), warmth)
        sky = lerp(horizon, (20, 28, 62), min(1.0, (el / 60.0) ** 0.7))
        # Gulls: small pale chevrons high up.
        for gull_az, gull_el in ((20.0, 66.0), (-60.0, 70.0), (110.0, 64.0)):
            dx = azimuth_distance(az, gull_az) * math.cos(math.radians(el))
            dy = el - gull_el
            if dx < 3.0 and abs(dy + 0.6 * dx) < 0.45:
                return (235, 235, 228)
        # The tram on the quay to the left: a long cream body with lit windows.
        if 62.0 < az < 104.0 and 0.0 <= el < 9.0:
            if 3.0 < el < 6.5 and (az * 2.0) % 4.0 < 2.6:
                return (250, 215, 120)
            return (214, 196, 150)
        # Distant hills across the harbour, behind.
        if azimuth_distance(az, 180.0) < 110.0:
            hill = 4.0 + 3.0 * math.sin(math.radians(az * 3.0)) + 2.0 * math.sin(math.radians(az * 7.0))
            if el < hill:
                return (44, 46, 70)
        # Lamp posts along the terrace.
        for post in (-75.0, -10.0, 70.0, 125.0, -130.0):
            if azimuth_distance(az, post) < 0.6 and el < 16.0:
                return (40, 40, 46)
            if azimuth_distance(az, post) < 1.6 and 15.0 <= el < 18.0:
                return (255, 220, 140)
        # People standing: the busker front-right, two talkers front-left.
        for person_az, height, coat in ((-35.0, 12.0, (120, 60, 50)), (30.0, 13.0, (60, 80, 110)), (50.0, 11.0, (90, 100, 70))):
            d = azimuth_distance(az, person_az)
            if d < 2.2 and el < height:
                return coat
            if d < 1.3 and height <= el < height + 2.5:
                return (210, 170, 140)
        # Guitar as a warm patch by the busker.
        if azimuth_distance(az, -32.0) < 2.0 and 3.0 < el < 7.0:
            return (170, 110, 50)
        return sky
    # Below the horizon: water behind, terrace paving in front.
    behind = azimuth_distance(az, 180.0) < 100.0
    depth = min(1.0, -el / 60.0)
    # Fountain basin behind, a little below the horizon.
    if azimuth_distance(az, 180.0) < 8.0 and -14.0 < el < -6.0:
        return (160, 190, 205) if (int(az * 3) + int(el * 3)) % 2 else (120, 150, 170)
    if behind and el > -8.0:
        glint = 30 if int((az + el * 7.0) * 2.0) % 9 == 0 else 0
        return lerp((60 + glint, 70 + glint, 100 + glint), (30, 40, 60), -el / 8.0)
    paving = lerp((110, 96, 84), (58, 52, 48), depth)
    # Paving joints.
    if int((az + 180.0) / 6.0) % 2 == int((-el) / 5.0) % 2:
        paving = tuple(max(0, c - 10) for c in paving)
    return paving


def main():
    out = sys.argv[1] if len(sys.argv) > 1 else "docs/editor-picture.png"
    width = int(sys.argv[2]) if len(sys.argv) > 2 else 2048
    height = width // 2
    rows = []
    for r in range(height):
        el = 90.0 - (r + 0.5) * 180.0 / height
        row = []
        for c in range(width):
            az = 180.0 - (c + 0.5) * 360.0 / width
            row.extend(colour_at(az, el))
        rows.append(row)
    write_png(out, width, height, rows)


if __name__ == "__main__":
    main()
