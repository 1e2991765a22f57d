"""Axial load shared by the piles of a rigid cap, on their as-built positions.

A rigid cap on piles of equal axial stiffness moves as a plane, so the pile loads are linear in
position: P_i = a + b x_i + c y_i. Equilibrium (sum P_i = N, sum P_i x_i = M_y + N x_load,
sum P_i y_i = M_x + N y_load) gives, about the centroid of the piles as placed
(x' = x - x_c, y' = y - y_c):

    P_i = N/n + [(M_y' I_yy - M_x' I_xy) x'_i + (M_x' I_xx - M_y' I_xy) y'_i] / (I_xx I_yy - I_xy^2)

with I_xx = sum x'^2, I_yy = sum y'^2, I_xy = sum x'y', M_x' = M_x + N (y_load - y_c) and
M_y' = M_y + N (x_load - x_c). The product term I_xy is kept because as-built groups are not
symmetric. Source: the rigid-cap equations (the general form; for a symmetric group it reduces
to N/n + M_x y/sum y^2 + M_y x/sum x^2, Bowles, Foundation Analysis and Design, pile caps).
Sign: M_x adds compression towards +y, M_y towards +x; compression positive.
"""

from __future__ import annotations

import math

import numpy as np


def group_shares(xy, n: float, mx: float = 0.0, my: float = 0.0,
                 load_point: tuple[float, float] = (0.0, 0.0), across: str = "raise") -> np.ndarray:
    """Axial load of each pile (kN, compression +) under a rigid cap.

    xy: k x 2 pile positions (m, easting and northing or any plan axes); n: vertical load (kN)
    acting at ``load_point`` (m, same axes); mx, my: moments (kNm) about the load point, mx
    adding compression towards +y and my towards +x. One pile takes everything and can carry no
    moment; piles in one line carry only the moment that tilts the cap along the line. The
    moment tilting it across the line (including N off the line) cannot be carried by the
    piles: ``across="raise"`` raises ValueError unless it is zero within 1e-9 kNm;
    ``across="ignore"`` leaves it to the cap's tie beams (``across_moment`` tells how much).
    """
    if across not in ("raise", "ignore"):
        raise ValueError(f"across must be raise or ignore, got {across!r}")
    pts = np.asarray(xy, dtype=float)
    if pts.ndim != 2 or pts.shape[1] != 2 or pts.shape[0] == 0:
        raise ValueError(f"xy must be a list of (x, y) pile positions, got shape {pts.shape}")
    if not np.all(np.isfinite(pts)):
        raise ValueError("xy must hold finite positions")
    for name, value in (("n", n), ("mx", mx), ("my", my)):
        if not math.isfinite(float(value)):
            raise ValueError(f"{name} must be a finite number, got {value!r}")
    lx, ly = (float(v) for v in load_point)
    if not (math.isfinite(lx) and math.isfinite(ly)):
        raise ValueError(f"load_point must be finite (easting, northing) in m, got {load_point!r}")
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
        if (abs(mx_c) > 1e-9 or abs(my_c) > 1e-9) and across == "raise":
            raise ValueError("a single pile (or piles at one point) cannot carry a moment from "
                             "the cap")
        return np.full(k, float(n) / k)
    if det <= 1e-12 * (ixx + iyy) ** 2:
        # piles on one line: only the moment tilting the cap along the line is carried
        far = int(np.argmax(np.hypot(dx, dy)))
        line = np.array([dx[far], dy[far]]) / math.hypot(dx[far], dy[far])
        along = my_c * line[0] + mx_c * line[1]        # compresses the +line end
        tilt = -my_c * line[1] + mx_c * line[0]
        if abs(tilt) > 1e-9 and across == "raise":
            raise ValueError(f"piles in one line cannot carry a moment that tilts the cap across "
                             f"the line ({tilt:.1f} kNm)")
        s = dx * line[0] + dy * line[1]
        return float(n) / k + along * s / float(s @ s)
    b = (my_c * iyy - mx_c * ixy) / det
    c = (mx_c * ixx - my_c * ixy) / det
    return float(n) / k + b * dx + c * dy


def across_moment(xy, n: float, mx: float = 0.0, my: float = 0.0,
                  load_point: tuple[float, float] = (0.0, 0.0)) -> float:
    """Moment (kNm) the piles cannot carry: 0 for a group that is not in one line; for piles in
    one line, the moment tilting the cap across the line (about the piles' centroid); for a
    single pile (or piles at one point), the whole moment."""
    pts = np.asarray(xy, dtype=float)
    centre = pts.mean(axis=0)
    dx, dy = pts[:, 0] - centre[0], pts[:, 1] - centre[1]
    mx_c = float(mx) + float(n) * (float(load_point[1]) - centre[1])
    my_c = float(my) + float(n) * (float(load_point[0]) - centre[0])
    ixx, iyy, ixy = float(dx @ dx), float(dy @ dy), float(dx @ dy)
    if pts.shape[0] == 1 or ixx + iyy < 1e-12:
        return math.hypot(mx_c, my_c)
    if ixx * iyy - ixy * ixy > 1e-12 * (ixx + iyy) ** 2:
        return 0.0
    far = int(np.argmax(np.hypot(dx, dy)))
    line = np.array([dx[far], dy[far]]) / math.hypot(dx[far], dy[far])
    return abs(-my_c * line[1] + mx_c * line[0])
