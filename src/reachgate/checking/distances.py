"""Signed distances between primitives over whole arrays (DESIGN §9), numpy only.

Points and vectors are component-major arrays (3, M) (or (3, 1) to broadcast a fixed shape),
box axes (3, 3, M) with axes[c] the box's c-th unit axis, half sizes (3,) (or (3, M): boxes of
several sizes in one call). Every function
returns (M,) distances in metres between the *cores* (segments, boxes, half-spaces); the caller
subtracts capsule radii. Negative values mean overlap: for half-spaces the exact depth, for a
segment inside a box minus the depth of its deepest point (see segment_box).

Exactness (tested against coal on random pairs): segment–segment (Ericson, *Real-Time
Collision Detection*, 2005, §5.1.9, with the final distance taken between the two closest
points), segment–half-space and box–half-space are closed forms; segment–box finds the root of
the derivative of the convex piecewise-quadratic squared distance along the segment exactly,
by bracketing it between the derivative's breakpoints; box–box is exact when apart because
two disjoint convex polyhedra have a closest pair with one point on an edge of one of them, so
it is the least of the 24 edge–box distances.
"""

from __future__ import annotations

import numpy as np

#: Squared segment lengths below this (m²) are points: the direction is undefined below it.
DEGENERATE_M2 = 1e-24
#: sin² of the angle between two segments below which the line solution is also checked
#: against the ends (about 1e-3 rad: there its cancellation starts to cost digits).
NEAR_PARALLEL = 1e-6


def _dot(u, v):
    return u[0] * v[0] + u[1] * v[1] + u[2] * v[2]


def segment_segment(p0, p1, q0, q1) -> np.ndarray:
    """Distance between segments p0-p1 and q0-q1, all (3, M) -> (M,) (>= 0)."""
    d1 = p1 - p0
    d2 = q1 - q0
    r = p0 - q0
    a = _dot(d1, d1)
    e = _dot(d2, d2)
    b = _dot(d1, d2)
    c = _dot(d1, r)
    f = _dot(d2, r)
    a_ok = a > DEGENERATE_M2
    e_ok = e > DEGENERATE_M2
    a_safe = np.where(a_ok, a, 1.0)
    e_safe = np.where(e_ok, e, 1.0)
    denom = a * e - b * b
    # s on the infinite lines (0 where parallel: any s serves, the clamps below settle t)
    crossing = denom > DEGENERATE_M2 * np.maximum(a * e, 1.0)
    s = np.where(crossing, np.clip((b * f - c * e) / np.where(crossing, denom, 1.0), 0, 1), 0)
    t = (b * s + f) / e_safe
    # t outside [0, 1]: clamp it and recompute s for that end
    s = np.where(t < 0.0, np.clip(-c / a_safe, 0.0, 1.0), s)
    s = np.where(t > 1.0, np.clip((b - c) / a_safe, 0.0, 1.0), s)
    t = np.clip(t, 0.0, 1.0)
    # degenerate segments: a point against a segment, or two points
    s = np.where(a_ok, s, 0.0)
    t = np.where(a_ok, t, np.clip(f / e_safe, 0.0, 1.0))
    s = np.where(e_ok, s, np.where(a_ok, np.clip(-c / a_safe, 0.0, 1.0), 0.0))
    t = np.where(e_ok, t, 0.0)
    gap = r + d1 * s - d2 * t
    distance = np.sqrt(_dot(gap, gap))
    # nearly parallel segments: the line solution loses digits to cancellation; the four
    # end-to-segment distances (well conditioned) bound it, and where the closest pair has an
    # end they are exact
    close_to_parallel = a_ok & e_ok & (denom <= NEAR_PARALLEL * a * e)
    if np.any(close_to_parallel):
        distance = distance.copy()
        distance[close_to_parallel] = np.minimum(
            distance[close_to_parallel], _end_distances(p0, p1, q0, q1, close_to_parallel)
        )
    return distance


def _point_segment(point, start, step, length2):
    """Distance from points to segments start + [0, 1] step, each a list of three (k,)."""
    along = np.clip(_dot(step, [point[i] - start[i] for i in range(3)]) / length2, 0.0, 1.0)
    gap = [point[i] - start[i] - along * step[i] for i in range(3)]
    return np.sqrt(_dot(gap, gap))


def _end_distances(p0, p1, q0, q1, mask) -> np.ndarray:
    """Least distance from each segment's ends to the other segment, for the masked entries."""
    shape = mask.shape
    p0, p1, q0, q1 = (
        [np.broadcast_to(v[i], shape)[mask] for i in range(3)] for v in (p0, p1, q0, q1)
    )
    dp = [p1[i] - p0[i] for i in range(3)]
    dq = [q1[i] - q0[i] for i in range(3)]
    lp, lq = _dot(dp, dp), _dot(dq, dq)
    return np.minimum(
        np.minimum(_point_segment(p0, q0, dq, lq), _point_segment(p1, q0, dq, lq)),
        np.minimum(_point_segment(q0, p0, dp, lp), _point_segment(q1, p0, dp, lp)),
    )


def _in_box_frame(p0, p1, center, axes):
    """Segment start and direction in the box's frame: two lists of three (M,) arrays."""
    rel = p0 - center
    step = p1 - p0
    return [_dot(axes[k], rel) for k in range(3)], [_dot(axes[k], step) for k in range(3)]


def _excess_slope(c, d, h, t):
    """d/dt of the half squared distance to the box at parameter t, summed over axes."""
    total = 0.0
    for k in range(3):
        u = c[k] + t * d[k]
        total = total + (u - np.clip(u, -h[k], h[k])) * d[k]
    return total


def _squared_distance(c, d, h, t):
    total = 0.0
    for k in range(3):
        u = c[k] + t * d[k]
        out = u - np.clip(u, -h[k], h[k])
        total = total + out * out
    return total


def segment_box(p0, p1, center, axes, half) -> np.ndarray:
    """Signed distance between segment p0-p1 (3, M) and an oriented box -> (M,).

    center (3, M), axes (3, 3, M), half (3,) or (3, M). Apart: the exact distance. Along the segment
    the squared distance to the box is convex and piecewise quadratic in the parameter t; its
    derivative is monotone with breakpoints where a coordinate crosses a face plane. The root
    is bracketed between the last breakpoint with a non-positive derivative and the first
    with a non-negative one, where the function is one quadratic, solved in closed form.
    Touching or inside: minus the depth of the segment's deepest point (the least, over the
    segment, of the largest face-plane excess), exact for a point.
    """
    c, d = _in_box_frame(p0, p1, center, axes)
    h = np.asarray(half, dtype=float)
    shape = np.broadcast_shapes(*(np.shape(v) for v in (*c, *d)))
    lower = np.zeros(shape)
    upper = np.ones(shape)
    for k in range(3):
        moving = np.abs(d[k]) > 0.0
        d_safe = np.where(moving, d[k], 1.0)
        for sign in (-1.0, 1.0):
            t = np.where(moving, np.clip((sign * h[k] - c[k]) / d_safe, 0.0, 1.0), 0.0)
            slope = _excess_slope(c, d, h, t)
            lower = np.where(slope <= 0.0, np.maximum(lower, t), lower)
            upper = np.where(slope >= 0.0, np.minimum(upper, t), upper)
    upper = np.maximum(upper, lower)
    # one quadratic on [lower, upper]: the axes outside the slab at the middle are active
    middle = 0.5 * (lower + upper)
    numerator = 0.0
    denominator = 0.0
    for k in range(3):
        u = c[k] + middle * d[k]
        above, below = u > h[k], u < -h[k]
        face = np.where(above, h[k], -h[k])
        active = above | below
        numerator = numerator + np.where(active, (c[k] - face) * d[k], 0.0)
        denominator = denominator + np.where(active, d[k] * d[k], 0.0)
    t_best = np.where(denominator > 0.0, -numerator / np.where(denominator > 0, denominator, 1), 0)
    t_best = np.clip(t_best, lower, upper)
    distance = np.sqrt(_squared_distance(c, d, h, t_best))
    inside = distance <= 0.0
    if np.any(inside):
        distance[inside] = -_deepest_point_depth(c, d, h, inside)
    return distance


def _deepest_point_depth(c, d, h, mask) -> np.ndarray:
    """For the masked entries (k,): minus the least over t in [0, 1] of max_k(|c_k + t d_k| - h_k).

    The inner function is a convex maximum of six linear functions of t; its least value lies
    at t = 0, t = 1 or where two of them cross, all of which are tried.
    """
    cs = [np.broadcast_to(v, mask.shape)[mask] for v in c]
    ds = [np.broadcast_to(v, mask.shape)[mask] for v in d]
    h = [np.broadcast_to(v, mask.shape)[mask] for v in h]
    count = cs[0].size
    # the six lines: sign * (c_k + t d_k) - h_k
    lines = [(s * cs[k], s * ds[k], h[k]) for k in range(3) for s in (-1.0, 1.0)]
    candidates = [np.zeros(count), np.ones(count)]
    for i in range(6):
        for j in range(i + 1, 6):
            (c1, d1, h1), (c2, d2, h2) = lines[i], lines[j]
            slope = d1 - d2
            with np.errstate(divide="ignore", invalid="ignore"):
                t = ((c2 - h2) - (c1 - h1)) / slope
            candidates.append(np.clip(np.where(np.isfinite(t), t, 0.0), 0.0, 1.0))
    best = np.full(count, np.inf)
    for t in candidates:
        best = np.minimum(best, np.max([ci + t * di - hi for ci, di, hi in lines], axis=0))
    return -best


def segment_halfspace(p0, p1, point, normal) -> np.ndarray:
    """Signed distance from segment p0-p1 (3, M) to the half-space n · (x - point) < 0."""
    return np.minimum(_dot(normal, p0 - point), _dot(normal, p1 - point))


def box_halfspace(center, axes, half, point, normal) -> np.ndarray:
    """Signed distance from an oriented box to the half-space n · (x - point) < 0, exact."""
    reach = sum(half[k] * np.abs(_dot(normal, axes[k])) for k in range(3))
    return _dot(normal, center - point) - reach


def _box_edges(center, axes, half):
    """The 12 edges of an oriented box as (start, end) pairs of (3, M) arrays."""
    edges = []
    for k in range(3):
        i, j = (k + 1) % 3, (k + 2) % 3
        for si in (-1.0, 1.0):
            for sj in (-1.0, 1.0):
                mid = center + si * half[i] * axes[i] + sj * half[j] * axes[j]
                edges.append((mid - half[k] * axes[k], mid + half[k] * axes[k]))
    return edges


def box_box(center_a, axes_a, half_a, center_b, axes_b, half_b) -> np.ndarray:
    """Signed distance between two oriented boxes -> (M,).

    Apart: exact, the least of the 24 edge–box distances (each box's 12 edges against the
    other box). Overlapping: negative, minus the depth of the deepest edge point inside the
    other box (a convex polyhedron that meets another has an edge inside it or crossing it).
    """
    best = None
    for start, end in _box_edges(center_a, axes_a, half_a):
        value = segment_box(start, end, center_b, axes_b, half_b)
        best = value if best is None else np.minimum(best, value)
    for start, end in _box_edges(center_b, axes_b, half_b):
        best = np.minimum(best, segment_box(start, end, center_a, axes_a, half_a))
    return best
