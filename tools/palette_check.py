#!/usr/bin/env python3
"""Check kicktrain's plot colours: neighbouring palette colours must stay apart for readers with
colour-vision deficiencies, and the sequential heatmap map must be uniform in lightness.

Method
- Colour-vision deficiency is simulated with the matrices of Machado, Oliveira & Fernandes, "A
  physiologically-based model for simulation of color vision deficiency", IEEE TVCG 15, 1291 (2009),
  severity 1.0 (protanopia, deuteranopia, tritanopia), applied to linear sRGB (matrix values from memory).
- Differences are CIEDE2000 (Sharma, Wu & Dalal, "The CIEDE2000 color-difference formula: implementation
  notes, supplementary test data, and mathematical observations", Color Res. Appl. 30, 21 (2005)).
- sRGB ↔ CIELAB with the D65 white point (IEC 61966-2-1; CIE 15:2004).

Usage: python3 tools/palette_check.py   (prints a table; exits 1 if a neighbour pair is closer than 8 ΔE00
under any vision, or the map's lightness is not monotonic).
Keep PALETTE and the map anchors here in step with src/report/svg.rs.
"""
import math, sys

PALETTE = ["#1f5fa8", "#d9622b", "#6a3d9a", "#2a7f3f", "#e3a0b8", "#a8324e", "#3fa7b5", "#c9a227"]
MAP_LAB = [(18.0, 18.0, -42.0), (55.5, -26.0, -10.0), (93.0, -10.0, 62.0)]

MACHADO = {
    "protanopia": [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216], [-0.003882, -0.048116, 1.051998]],
    "deuteranopia": [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413], [-0.011820, 0.042940, 0.968881]],
    "tritanopia": [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602], [0.004733, 0.691367, 0.303900]],
}


def hex_rgb(h):
    return [int(h[i:i + 2], 16) / 255.0 for i in (1, 3, 5)]


def to_linear(c):
    return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4


def to_gamma(c):
    c = min(max(c, 0.0), 1.0)
    return 12.92 * c if c <= 0.0031308 else 1.055 * c ** (1 / 2.4) - 0.055


def lin_to_lab(rgb):
    r, g, b = rgb
    x = 0.4124564 * r + 0.3575761 * g + 0.1804375 * b
    y = 0.2126729 * r + 0.7151522 * g + 0.0721750 * b
    z = 0.0193339 * r + 0.1191920 * g + 0.9503041 * b
    xn, yn, zn = 0.95047, 1.0, 1.08883
    f = lambda t: t ** (1 / 3) if t > (6 / 29) ** 3 else t / (3 * (6 / 29) ** 2) + 4 / 29
    fx, fy, fz = f(x / xn), f(y / yn), f(z / zn)
    return (116 * fy - 16, 500 * (fx - fy), 200 * (fy - fz))


def lab_to_lin(lab):
    L, a, b = lab
    fy = (L + 16) / 116
    fx, fz = fy + a / 500, fy - b / 200
    finv = lambda t: t ** 3 if t > 6 / 29 else 3 * (6 / 29) ** 2 * (t - 4 / 29)
    x, y, z = 0.95047 * finv(fx), finv(fy), 1.08883 * finv(fz)
    r = 3.2404542 * x - 1.5371385 * y - 0.4985314 * z
    g = -0.9692660 * x + 1.8760108 * y + 0.0415560 * z
    bb = 0.0556434 * x - 0.2040259 * y + 1.0572252 * z
    return [r, g, bb]


def ciede2000(l1, l2):
    L1, a1, b1 = l1
    L2, a2, b2 = l2
    C1, C2 = math.hypot(a1, b1), math.hypot(a2, b2)
    Cb = (C1 + C2) / 2
    G = 0.5 * (1 - math.sqrt(Cb ** 7 / (Cb ** 7 + 25 ** 7)))
    a1p, a2p = (1 + G) * a1, (1 + G) * a2
    C1p, C2p = math.hypot(a1p, b1), math.hypot(a2p, b2)
    h1p = math.degrees(math.atan2(b1, a1p)) % 360
    h2p = math.degrees(math.atan2(b2, a2p)) % 360
    dLp, dCp = L2 - L1, C2p - C1p
    dhp = 0.0 if C1p * C2p == 0 else (h2p - h1p if abs(h2p - h1p) <= 180 else (h2p - h1p - 360 if h2p > h1p else h2p - h1p + 360))
    dHp = 2 * math.sqrt(C1p * C2p) * math.sin(math.radians(dhp / 2))
    Lbp, Cbp = (L1 + L2) / 2, (C1p + C2p) / 2
    if C1p * C2p == 0:
        hbp = h1p + h2p
    elif abs(h1p - h2p) <= 180:
        hbp = (h1p + h2p) / 2
    else:
        hbp = (h1p + h2p + 360) / 2 if h1p + h2p < 360 else (h1p + h2p - 360) / 2
    T = 1 - 0.17 * math.cos(math.radians(hbp - 30)) + 0.24 * math.cos(math.radians(2 * hbp)) + 0.32 * math.cos(math.radians(3 * hbp + 6)) - 0.20 * math.cos(math.radians(4 * hbp - 63))
    dth = 30 * math.exp(-(((hbp - 275) / 25) ** 2))
    Rc = 2 * math.sqrt(Cbp ** 7 / (Cbp ** 7 + 25 ** 7))
    Sl = 1 + 0.015 * (Lbp - 50) ** 2 / math.sqrt(20 + (Lbp - 50) ** 2)
    Sc, Sh = 1 + 0.045 * Cbp, 1 + 0.015 * Cbp * T
    Rt = -math.sin(math.radians(2 * dth)) * Rc
    return math.sqrt((dLp / Sl) ** 2 + (dCp / Sc) ** 2 + (dHp / Sh) ** 2 + Rt * (dCp / Sc) * (dHp / Sh))


def seen(hexcolour, vision):
    lin = [to_linear(c) for c in hex_rgb(hexcolour)]
    if vision != "normal":
        m = MACHADO[vision]
        lin = [min(max(sum(m[i][j] * lin[j] for j in range(3)), 0.0), 1.0) for i in range(3)]
    return lin_to_lab(lin)


def main():
    # Sharma et al. 2005, Table 1, pair 1: ΔE00 = 2.0425.
    assert abs(ciede2000((50, 2.6772, -79.7751), (50, 0, -82.7485)) - 2.0425) < 1e-4
    ok = True
    visions = ["normal", "protanopia", "deuteranopia", "tritanopia"]
    print("neighbour pair      " + "  ".join(f"{v:>12}" for v in visions))
    n = len(PALETTE)
    for i in range(n):
        a, b = PALETTE[i], PALETTE[(i + 1) % n]
        d = [ciede2000(seen(a, v), seen(b, v)) for v in visions]
        ok &= min(d) >= 8.0
        print(f"{a} {b}  " + "  ".join(f"{x:12.1f}" for x in d))
    worst = min(ciede2000(seen(PALETTE[i], v), seen(PALETTE[j], v)) for v in visions for i in range(n) for j in range(i + 1, n))
    print(f"smallest difference of any two palette colours under any vision: {worst:.1f} ΔE00")
    # Sequential map: lightness strictly rising; report the gamut clipping.
    prev = -1
    clipped = 0.0
    for k in range(101):
        t = k / 100
        seg = 0 if t <= 0.5 else 1
        u = t / 0.5 if seg == 0 else (t - 0.5) / 0.5
        lab = [MAP_LAB[seg][c] + (MAP_LAB[seg + 1][c] - MAP_LAB[seg][c]) * u for c in range(3)]
        lin = lab_to_lin(lab)
        clipped = max(clipped, max(max(0 - x, x - 1, 0) for x in lin))
        L = lin_to_lab([min(max(x, 0), 1) for x in lin])[0]
        ok &= L > prev
        prev = L
    print(f"map: lightness rising from {MAP_LAB[0][0]} to {MAP_LAB[-1][0]}; largest out-of-gamut excursion before clipping {clipped:.3f} (linear RGB)")
    sys.exit(0 if ok else 1)


if __name__ == "__main__":
    main()
