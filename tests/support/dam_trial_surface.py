#!/usr/bin/python3
"""Independent reference for seepage check S4: the exit point of the free surface on the
downstream slope of a homogeneous dam on an impervious base, by the classical trial
free-surface method on a boundary-fitted mesh (a different method from seepd's fixed-mesh
solver, which keeps one mesh and lets elements conduct by their wet fraction).

The wet region is meshed exactly: its top is the trial free surface, a polyline from the point
where the pool meets the upstream slope to a trial exit point on the downstream slope. Linear
triangles: points laid in vertical columns (graded from the element size to a finer size at the
exit point), each column from the base to the top of the wet region, and each strip between two
columns (a trapezoid) triangulated by zipping its two columns together; the triangles' area is
checked against the region's. Conditions: total head = pool level on the submerged upstream
slope, head = elevation on the seepage face (the downstream slope below the trial exit point),
no flow across the base and the trial surface.

Inner iteration (exit point held): solve, move every free-surface node vertically to the head
computed there (y := h), re-mesh, until no node moves more than 1e-7 m. The exit point is then
found by Brent's method on the condition that closes the problem on a slope flatter than
vertical: the free surface meets the face tangentially (the last free-surface segment has the
face's slope). Above the root the surface meets the face at a kink, below it the surface would
cross above the face; neither holds a harmonic head with zero pressure and no flow on the
surface.

Input (stdin, JSON): pool_m, upstream_cot, crest_y_m, crest_w_m, downstream_cot, levels (list
of [element size m, size at the exit point m]), optional bracket [a_lo, a_hi] m along the slope.
Output (stdout, JSON): {"levels": [...]} with, per level, the sizes, nodes, elements, exit
distance along the slope from the toe, exit elevation, q/k (m) and the number of linear solves.
Only numpy and scipy are used.
"""

import json
import sys

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy.optimize import brentq


class Dam:
    def __init__(self, d):
        self.h = float(d["pool_m"])
        self.up_cot = float(d["upstream_cot"])
        self.crest_y = float(d["crest_y_m"])
        self.down_cot = float(d["downstream_cot"])
        up_crest_x = self.up_cot * self.crest_y
        self.toe = up_crest_x + float(d["crest_w_m"]) + self.down_cot * self.crest_y
        self.x_entry = self.up_cot * self.h  # the pool meets the upstream slope
        self.sin = 1.0 / np.hypot(1.0, self.down_cot)

    def exit_x(self, a):
        """x of the point a metres up the downstream slope from the toe."""
        return self.toe - self.down_cot * a * self.sin

    def face_y(self, x):
        return (self.toe - x) / self.down_cot


def column_positions(dam, xe, size, fine):
    """Column abscissae from 0 to the toe, graded from `fine` at the exit point to `size`,
    with columns exactly at the entry point and the exit point."""

    def spacing(x):
        return np.minimum(size, fine + 0.15 * np.abs(x - xe))

    def run(a, b):
        xs = [a]
        while xs[-1] < b - 1e-12:
            xs.append(xs[-1] + spacing(xs[-1]))
        xs = np.array(xs)
        return a + (xs - a) * (b - a) / (xs[-1] - a)

    parts = [run(0.0, dam.x_entry), run(dam.x_entry, xe), run(xe, dam.toe)]
    return np.concatenate([parts[0], parts[1][1:], parts[2][1:]]), spacing


def build(dam, xe, surf_x, surf_y, size, fine):
    """Mesh of the wet region under the trial surface (surf_x from the entry to xe)."""
    xs, spacing = column_positions(dam, xe, size, fine)
    top = np.where(
        xs <= dam.x_entry,
        xs / dam.up_cot,
        np.where(xs >= xe, dam.face_y(xs), np.interp(xs, surf_x, surf_y)),
    )
    top[np.isclose(xs, dam.x_entry)] = dam.h
    top[np.isclose(xs, xe)] = dam.face_y(xe)
    pts, first, count = [], [], []
    for x, t in zip(xs, top):
        n = int(np.ceil(t / spacing(x) - 1e-9)) if t > 1e-12 else 0
        first.append(len(pts))
        count.append(n)
        pts.extend((x, t * j / n) for j in range(n + 1)) if n else pts.append((x, 0.0))
    p = np.array(pts)
    tri = []
    # Each strip between two columns is a trapezoid (vertical sides, straight base and top):
    # zip the two columns' points together by relative height.
    for c in range(len(xs) - 1):
        left, right = first[c], first[c + 1]
        m, n = count[c], count[c + 1]
        i = j = 0
        while i < m or j < n:
            if j == n or (i < m and (i + 1) / m <= (j + 1) / n):
                tri.append((left + i, right + j, left + i + 1))
                i += 1
            else:
                tri.append((left + i, right + j, right + j + 1))
                j += 1
    tri = np.array(tri)
    top_node = np.array(first) + np.array(count)
    a, b, cc = p[tri[:, 0]], p[tri[:, 1]], p[tri[:, 2]]
    two_area = (b[:, 0] - a[:, 0]) * (cc[:, 1] - a[:, 1]) - (b[:, 1] - a[:, 1]) * (
        cc[:, 0] - a[:, 0]
    )
    keep = np.abs(two_area) > 0
    tri, two_area = tri[keep], two_area[keep]
    flip = two_area < 0
    tri[flip] = tri[flip][:, [0, 2, 1]]
    region = np.trapz(top, xs)
    if abs(0.5 * np.abs(two_area).sum() / region - 1.0) > 1e-9:
        raise RuntimeError("triangulation does not fill the wet region")
    return p, tri, xs, top, top_node


def solve(dam, p, tri, xe):
    """Heads and nodal outflows (positive leaving) for unit permeability."""
    n = len(p)
    a, b, c = p[tri[:, 0]], p[tri[:, 1]], p[tri[:, 2]]
    bb = np.stack([b[:, 1] - c[:, 1], c[:, 1] - a[:, 1], a[:, 1] - b[:, 1]], 1)
    cc = np.stack([c[:, 0] - b[:, 0], a[:, 0] - c[:, 0], b[:, 0] - a[:, 0]], 1)
    two_area = (b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1]) - (b[:, 1] - a[:, 1]) * (
        c[:, 0] - a[:, 0]
    )
    ke = (bb[:, :, None] * bb[:, None, :] + cc[:, :, None] * cc[:, None, :]) / (
        2.0 * two_area
    )[:, None, None]
    rows = np.repeat(tri, 3, axis=1).ravel()
    cols = np.tile(tri, 3).ravel()
    k = sp.csr_matrix((ke.ravel(), (rows, cols)), shape=(n, n))
    x, y = p[:, 0], p[:, 1]
    tol = 1e-9
    upstream = (x <= dam.x_entry + tol) & (np.abs(y - x / dam.up_cot) < tol)
    seepage = (x >= xe - tol) & (np.abs(y - dam.face_y(x)) < tol) & (y > tol)
    fixed = upstream | seepage
    head = np.where(upstream, dam.h, y)
    free = ~fixed
    kf = k[free]
    head[free] = spla.spsolve(kf[:, free].tocsc(), -kf[:, fixed] @ head[fixed])
    outflow = -(k @ head)
    return head, outflow, seepage


class Reference:
    def __init__(self, dam, size, fine):
        self.dam, self.size, self.fine = dam, size, fine
        self.solves = 0
        self.surface = None  # last converged surface, relative abscissa and height

    def settle(self, a):
        """Inner iteration for the exit point a m up the slope; the converged state."""
        dam = self.dam
        xe = dam.exit_x(a)
        ye = dam.face_y(xe)
        if self.surface is None:
            sx, sy = np.array([dam.x_entry, xe]), np.array([dam.h, ye])
        else:
            u, sy = self.surface
            sx = dam.x_entry + u * (xe - dam.x_entry)
            sy = np.minimum(sy, dam.crest_y)
            sy[-1] = ye
        for _ in range(200):
            p, tri, xs, top, top_node = build(dam, xe, sx, sy, self.size, self.fine)
            head, outflow, seepage = solve(dam, p, tri, xe)
            self.solves += 1
            on = (xs >= dam.x_entry - 1e-12) & (xs <= xe + 1e-12)
            new_x, old_y = xs[on], top[on]
            new_y = head[top_node[on]]
            new_y[0], new_y[-1] = dam.h, ye
            moved = np.max(np.abs(new_y - old_y))
            sx, sy = new_x, new_y
            if moved < 1e-7:
                break
        else:
            raise RuntimeError(f"free surface did not settle for a = {a}")
        self.surface = ((sx - dam.x_entry) / (xe - dam.x_entry), sy)
        return {
            "p": p,
            "tri": tri,
            "surface": (sx, sy),
            "q": float(outflow[seepage].sum()),
        }

    def tangency(self, a):
        """Slope of the last free-surface segment minus the face's (0 at the exit point)."""
        sx, sy = self.settle(a)["surface"]
        return (sy[-1] - sy[-2]) / (sx[-1] - sx[-2]) + 1.0 / self.dam.down_cot


def main():
    d = json.load(sys.stdin)
    dam = Dam(d)
    lo, hi = d.get("bracket", [14.0, 22.0])
    out = []
    for size, fine in d["levels"]:
        ref = Reference(dam, float(size), float(fine))
        a = brentq(ref.tangency, lo, hi, xtol=1e-4, rtol=1e-10)
        state = ref.settle(a)
        out.append(
            {
                "size_m": size,
                "exit_size_m": fine,
                "nodes": int(len(state["p"])),
                "elements": int(len(state["tri"])),
                "exit_along_slope_m": a,
                "exit_elevation_m": a * dam.sin,
                "q_over_k_m": state["q"],
                "linear_solves": ref.solves,
            }
        )
        # The next level's root lies near this one.
        lo, hi = a - 1.0, a + 1.0
        print(json.dumps(out[-1]), file=sys.stderr)
    json.dump({"levels": out}, sys.stdout)
    print()


if __name__ == "__main__":
    main()
