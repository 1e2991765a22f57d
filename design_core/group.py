"""Axial load shared by the piles of a rigid cap, on their as-built positions.

A rigid cap on piles of equal axial stiffness moves as a plane, so the pile loads are linear in
position: P_i = a + b x_i + c y_i. Equilibrium (sum P_i = N, sum P_i x_i = M_y + N x_load,
sum P_i y_i = M_x + N y_load) gives, about the centroid of the piles as placed
(x' = x - x_c, y' = y - y_c):

    P_i = N/n + [(M_y' I_yy - M_x' I_xy) x'_i + (M_x' I_xx - M_y' I_xy) y'_i] / (I_xx I_yy - I_xy^2)

with I_xx = sum x'^2, I_yy = sum y'^2, I_xy = sum x'y', M_x' = M_x + N (y_load - y_c) and
M_y' = M_y + N (x_load - x_c). The product term I_xy is kept because as-built groups are not
symmetric. Source: REFERENCES.md section 11 (the general form; for a symmetric group it reduces
to N/n + M_x y/sum y^2 + M_y x/sum x^2, Bowles, Foundation Analysis and Design, pile caps).
Sign: M_x adds compression towards +y, M_y towards +x; compression positive.
"""

from __future__ import annotations

import math

import numpy as np


def group_shares(xy, n: float, mx: float = 0.0, my: float = 0.0,
                 load_point: tuple[float, float] = (0.0, 0.0)) -> np.ndarray:
    """Axial load of each pile (kN, compression +) under a rigid cap.

    xy: k x 2 pile positions (m, easting and northing or any plan axes); n: vertical load (kN)
    acting at ``load_point`` (m, same axes); mx, my: moments (kNm) about the load point, mx
    adding compression towards +y and my towards +x. One pile takes everything and can carry no
    moment; two piles carry moment only about the axis across their line (the component along
    it raises ValueError if not zero within 1e-9 kNm, since the cap would rotate freely).
    """
    pts = np.asarray(xy, dtype=float)
    if pts.ndim != 2 or pts.shape[1] != 2 or pts.shape[0] == 0:
        raise ValueError(f"xy must be a list of (x, y) pile positions, got shape {pts.shape}")
    if not np.all(np.isfinite(pts)):
        raise ValueError("xy must hold finite positions")
    for name, value in (("n", n), ("mx", mx), ("my", my)):
        if not math.isfinite(float(value)):
            raise ValueError(f"{name} must be a finite number, got {value!r}")
    lx, ly = (float(v) for v in load_point)
    k = pts.shape[0]
    centre = pts.mean(axis=0)
    dx = pts[:, 0] - centre[0]
    dy = pts[:, 1] - centre[1]
    mx_c = float(mx) + float(n) * (ly - centre[1])
    my_c = float(my) + float(n) * (lx - centre[0])
    ixx = float(dx @ dx)
    iyy = float(dy @ dy)
    ixy = float(dx @ dy)
    det = ixx * iyy - ixy * ixy
    if k == 1 or ixx + iyy < 1e-12:
        if abs(mx_c) > 1e-9 or abs(my_c) > 1e-9:
            raise ValueError("a single pile (or piles at one point) cannot carry a moment from "
                             "the cap")
        return np.full(k, float(n) / k)
    if det <= 1e-12 * (ixx + iyy) ** 2:
        # piles on one line: only the moment tilting the cap along the line is carried
        far = int(np.argmax(np.hypot(dx, dy)))
        line = np.array([dx[far], dy[far]]) / math.hypot(dx[far], dy[far])
        along = my_c * line[0] + mx_c * line[1]        # compresses the +line end
        across = -my_c * line[1] + mx_c * line[0]
        if abs(across) > 1e-9:
            raise ValueError("piles in one line cannot carry a moment that tilts the cap across "
                             "the line")
        s = dx * line[0] + dy * line[1]
        return float(n) / k + along * s / float(s @ s)
    b = (my_c * iyy - mx_c * ixy) / det
    c = (mx_c * ixx - my_c * ixy) / det
    return float(n) / k + b * dx + c * dy
