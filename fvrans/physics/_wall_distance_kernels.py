"""numba kernels of the exact wall distance: a bounding-box tree over the wall segments and the
nearest-segment search through it (branch and bound with exact box lower bounds)."""

from __future__ import annotations

import numpy as np
from numba import njit

LEAF_SIZE = 4
STACK_SIZE = 256  # > 2 x tree depth; depth <= log2(m) + 1 for median splits


@njit(cache=True, inline="always")
def _point_segment(px, py, ax, ay, ex, ey, l2):
    """Euclidean distance from (px, py) to the segment a + t e, t in [0, 1].

    With w = p - a and t = (w . e) / |e|^2: |w| for t <= 0, |p - (a + e)| for t >= 1, and the
    perpendicular distance |w x e| / |e| in between (exactly 0 for a point on the segment's line
    whenever the cross product is exact).
    """
    wx = px - ax
    wy = py - ay
    dot = wx * ex + wy * ey
    if dot <= 0.0 or l2 == 0.0:
        return np.sqrt(wx * wx + wy * wy)
    if dot >= l2:
        bx = wx - ex
        by = wy - ey
        return np.sqrt(bx * bx + by * by)
    return abs(wx * ey - wy * ex) / np.sqrt(l2)


@njit(cache=True, inline="always")
def _box_distance2(px, py, box):
    """Squared distance from (px, py) to the box [x0, x1] x [y0, y1] (0 inside): a lower bound
    of the distance to anything inside the box."""
    dx = max(box[0] - px, 0.0, px - box[1])
    dy = max(box[2] - py, 0.0, py - box[3])
    return dx * dx + dy * dy


@njit(cache=True)
def build_tree(seg_a, seg_e):
    """Bounding-box tree of the segments by recursive median splits of their midpoints along the
    wider extent. Returns (order, node_start, node_stop, node_left, node_right, node_box): node i
    holds the segments ``order[node_start[i]:node_stop[i]]``; leaves have ``node_left = -1``;
    node_box[i] = (x0, x1, y0, y1) encloses all of its segments. Node 0 is the root."""
    m = seg_a.shape[0]
    order = np.arange(m)
    cx = seg_a[:, 0] + 0.5 * seg_e[:, 0]
    cy = seg_a[:, 1] + 0.5 * seg_e[:, 1]
    max_nodes = 2 * m + 1  # at most m leaves
    node_start = np.empty(max_nodes, np.int64)
    node_stop = np.empty(max_nodes, np.int64)
    node_left = np.full(max_nodes, -1, np.int64)
    node_right = np.full(max_nodes, -1, np.int64)
    node_box = np.empty((max_nodes, 4))
    node_start[0] = 0
    node_stop[0] = m
    n_nodes = 1
    todo = np.empty(max_nodes, np.int64)
    todo[0] = 0
    n_todo = 1
    while n_todo > 0:
        n_todo -= 1
        node = todo[n_todo]
        lo = node_start[node]
        hi = node_stop[node]
        x0 = np.inf
        x1 = -np.inf
        y0 = np.inf
        y1 = -np.inf
        for k in range(lo, hi):
            s = order[k]
            ax = seg_a[s, 0]
            ay = seg_a[s, 1]
            bx = ax + seg_e[s, 0]
            by = ay + seg_e[s, 1]
            x0 = min(x0, ax, bx)
            x1 = max(x1, ax, bx)
            y0 = min(y0, ay, by)
            y1 = max(y1, ay, by)
        node_box[node, 0] = x0
        node_box[node, 1] = x1
        node_box[node, 2] = y0
        node_box[node, 3] = y1
        if hi - lo <= LEAF_SIZE:
            continue
        sub = order[lo:hi]
        if x1 - x0 >= y1 - y0:
            key = cx[sub]
        else:
            key = cy[sub]
        order[lo:hi] = sub[np.argsort(key, kind="mergesort")]
        mid = (lo + hi) // 2
        left = n_nodes
        right = n_nodes + 1
        n_nodes += 2
        node_start[left] = lo
        node_stop[left] = mid
        node_start[right] = mid
        node_stop[right] = hi
        node_left[node] = left
        node_right[node] = right
        todo[n_todo] = left
        todo[n_todo + 1] = right
        n_todo += 2
    return (
        order,
        node_start[:n_nodes].copy(),
        node_stop[:n_nodes].copy(),
        node_left[:n_nodes].copy(),
        node_right[:n_nodes].copy(),
        node_box[:n_nodes].copy(),
    )


@njit(cache=True)
def nearest_segment(
    points, seg_a, seg_e, seg_l2, order, node_start, node_stop, node_left, node_right, node_box, dist, nearest
):
    """For each point: the exact minimum distance to the segments into ``dist`` and the segment
    reaching it (lowest index among equal distances) into ``nearest``.

    Depth-first branch and bound: a node is skipped when the distance to its box exceeds the
    best distance found so far, which cannot discard a closer segment; the nearer child is
    visited first so that the bound tightens quickly.
    """
    n = points.shape[0]
    stack = np.empty(STACK_SIZE, np.int64)
    for i in range(n):
        px = points[i, 0]
        py = points[i, 1]
        best = np.inf
        best2 = np.inf
        best_s = -1
        stack[0] = 0
        top = 1
        while top > 0:
            top -= 1
            node = stack[top]
            if _box_distance2(px, py, node_box[node]) > best2:
                continue
            left = node_left[node]
            if left < 0:
                for k in range(node_start[node], node_stop[node]):
                    s = order[k]
                    d = _point_segment(px, py, seg_a[s, 0], seg_a[s, 1], seg_e[s, 0], seg_e[s, 1], seg_l2[s])
                    if d < best or (d == best and s < best_s):
                        best = d
                        best2 = d * d * (1.0 + 1e-12)  # keep boxes tied to round-off
                        best_s = s
                continue
            right = node_right[node]
            dl = _box_distance2(px, py, node_box[left])
            dr = _box_distance2(px, py, node_box[right])
            if dl <= dr:  # push the farther child first so the nearer one is searched first
                if dr <= best2:
                    stack[top] = right
                    top += 1
                if dl <= best2:
                    stack[top] = left
                    top += 1
            else:
                if dl <= best2:
                    stack[top] = left
                    top += 1
                if dr <= best2:
                    stack[top] = right
                    top += 1
        dist[i] = best
        nearest[i] = best_s
