"""Signed distances between primitives against coal and analytic cases (DESIGN §9)."""

from __future__ import annotations

import coal
import numpy as np
import pytest

from reachgate.checking.clearance import _primitive_distance
from reachgate.checking.distances import segment_segment
from reachgate.kinematics.bodies import HalfSpace, OrientedBox, Segment
from reachgate.model.transforms import rpy_to_matrix

#: Agreement with coal: closed forms on both sides (capsules, spheres, half-spaces) ...
EXACT_TOL_M = 1e-9
#: ... and coal's GJK on boxes (its default tolerance), against our exact box distances.
BOX_TOL_M = 1e-6
SAMPLES = 200


def _request() -> coal.DistanceRequest:
    request = coal.DistanceRequest()
    request.gjk_tolerance = 1e-12
    return request


def coal_distance(shape_a, T_a, shape_b, T_b) -> float:
    return coal.distance(shape_a, T_a, shape_b, T_b, _request(), coal.DistanceResult())


def coal_capsule(p0, p1, radius):
    """coal's capsule lies along its own z, centred: a frame whose z runs p0 -> p1."""
    axis = p1 - p0
    length = float(np.linalg.norm(axis))
    z = axis / length if length > 0 else np.array([0.0, 0.0, 1.0])
    helper = np.array([1.0, 0.0, 0.0]) if abs(z[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    x = np.cross(helper, z)
    x /= np.linalg.norm(x)
    R = np.column_stack([x, np.cross(z, x), z])
    shape = coal.Capsule(radius, length) if length > 0 else coal.Sphere(radius)
    return shape, coal.Transform3s(R, 0.5 * (p0 + p1))


def random_segments(rng, count, spread, length, sphere=False):
    p0 = rng.normal(0.0, 0.4 * spread if sphere else spread, (3, count))  # spheres: closer
    p1 = p0 if sphere else p0 + rng.normal(0.0, length, (3, count))
    return p0, p1, rng.uniform(0.01, 0.3, count)


def random_boxes(rng, count, spread):
    center = rng.normal(0.0, spread, (3, count))
    R = rpy_to_matrix(rng.uniform(-np.pi, np.pi, (count, 3)))
    half = rng.uniform(0.05, 0.6, 3)
    return center, R, half


def as_box(center, R, half):
    return OrientedBox(center, np.transpose(R, (2, 1, 0)), half)


@pytest.mark.parametrize(
    ("kinds", "seed"),
    [(("capsule", "capsule"), 1201), (("sphere", "sphere"), 1202), (("sphere", "capsule"), 1203)],
)
def test_capsules_and_spheres_agree_with_coal(kinds, seed):
    """Source: coal.distance (Capsule, Sphere) on seeded random pairs, overlapping ones
    included (signed: the depth); agreement to 1e-9 m."""
    rng = np.random.default_rng(seed)
    a0, a1, ra = random_segments(rng, SAMPLES, 1.0, 0.8, sphere=kinds[0] == "sphere")
    b0, b1, rb = random_segments(rng, SAMPLES, 1.0, 0.8, sphere=kinds[1] == "sphere")
    ours = np.concatenate(
        [_primitive_distance(Segment(a0[:, [k]], a1[:, [k]], ra[k]),
                             Segment(b0[:, [k]], b1[:, [k]], rb[k])) for k in range(SAMPLES)]
    )  # fmt: skip
    batched = _primitive_distance(Segment(a0, a1, 0.0), Segment(b0, b1, 0.0)) - ra - rb
    reference = np.array(
        [coal_distance(*coal_capsule(a0[:, k], a1[:, k], ra[k]),
                       *coal_capsule(b0[:, k], b1[:, k], rb[k])) for k in range(SAMPLES)]
    )  # fmt: skip
    assert (reference < 0).any() and (reference > 0).any()  # both signs are exercised
    np.testing.assert_allclose(batched, ours, atol=1e-15)
    np.testing.assert_allclose(ours, reference, atol=EXACT_TOL_M, rtol=0)


@pytest.mark.parametrize(("sphere", "seed"), [(False, 1204), (True, 1205)])
def test_capsule_and_sphere_against_a_plane_agree_with_coal(sphere, seed):
    """Source: coal.distance against coal.Halfspace(n, n·point), solid where n·x < n·point
    (DESIGN §8: solid on the side the normal points away from); signed, to 1e-9 m."""
    rng = np.random.default_rng(seed)
    p0, p1, r = random_segments(rng, SAMPLES, 0.8, 0.8, sphere=sphere)
    normal = rng.normal(size=3)
    normal /= np.linalg.norm(normal)
    point = rng.normal(0.0, 0.3, 3)
    plane = HalfSpace(point[:, None], normal[:, None])
    ours = np.array(
        [_primitive_distance(Segment(p0[:, [k]], p1[:, [k]], r[k]), plane)[0]
         for k in range(SAMPLES)]
    )  # fmt: skip
    half = coal.Halfspace(normal, float(normal @ point))
    reference = np.array(
        [coal_distance(*coal_capsule(p0[:, k], p1[:, k], r[k]), half, coal.Transform3s())
         for k in range(SAMPLES)]
    )  # fmt: skip
    assert (reference < 0).any() and (reference > 0).any()
    np.testing.assert_allclose(ours, reference, atol=EXACT_TOL_M, rtol=0)


@pytest.mark.parametrize(("sphere", "seed"), [(False, 1206), (True, 1207)])
def test_capsule_and_sphere_against_a_box_agree_with_coal(sphere, seed):
    """Source: coal.distance (Capsule or Sphere vs Box, GJK) on seeded random pairs that are
    apart; agreement to 1e-6 m. Overlap gives a negative value (its depth is ours, see
    checking.distances.segment_box)."""
    rng = np.random.default_rng(seed)
    p0, p1, r = random_segments(rng, SAMPLES, 1.2, 0.8, sphere=sphere)
    center, R, half = random_boxes(rng, SAMPLES, 1.2)
    ours = _primitive_distance(Segment(p0, p1, 0.0), as_box(center, R, half)) - r
    reference = np.array(
        [coal_distance(*coal_capsule(p0[:, k], p1[:, k], r[k]),
                       coal.Box(*(2 * half)), coal.Transform3s(R[k], center[:, k]))
         for k in range(SAMPLES)]
    )  # fmt: skip
    apart = reference > 0
    assert apart.sum() > SAMPLES // 3 and (~apart).any()
    np.testing.assert_allclose(ours[apart], reference[apart], atol=BOX_TOL_M, rtol=0)
    assert np.all(ours[~apart] <= BOX_TOL_M)  # overlap never reads as clear


def test_box_against_box_and_plane_agree_with_coal():
    """Source: coal.distance (Box vs Box by GJK, Box vs Halfspace) on seeded random pairs;
    boxes apart to 1e-6 m, box against plane (exact on both sides) signed to 1e-9 m."""
    rng = np.random.default_rng(1208)
    ca, Ra, ha = random_boxes(rng, SAMPLES, 1.5)
    cb, Rb, hb = random_boxes(rng, SAMPLES, 1.5)
    ours = _primitive_distance(as_box(ca, Ra, ha), as_box(cb, Rb, hb))
    reference = np.array(
        [coal_distance(coal.Box(*(2 * ha)), coal.Transform3s(Ra[k], ca[:, k]),
                       coal.Box(*(2 * hb)), coal.Transform3s(Rb[k], cb[:, k]))
         for k in range(SAMPLES)]
    )  # fmt: skip
    apart = reference > 0
    assert apart.sum() > SAMPLES // 3 and (~apart).any()
    np.testing.assert_allclose(ours[apart], reference[apart], atol=BOX_TOL_M, rtol=0)
    assert np.all(ours[~apart] <= BOX_TOL_M)
    normal = np.array([0.3, -0.2, 0.9])
    normal /= np.linalg.norm(normal)
    plane = HalfSpace(np.zeros((3, 1)), normal[:, None])
    ours_plane = _primitive_distance(as_box(ca, Ra, ha), plane)
    half = coal.Halfspace(normal, 0.0)
    reference_plane = np.array(
        [coal_distance(coal.Box(*(2 * ha)), coal.Transform3s(Ra[k], ca[:, k]), half,
                       coal.Transform3s()) for k in range(SAMPLES)]
    )  # fmt: skip
    np.testing.assert_allclose(ours_plane, reference_plane, atol=BOX_TOL_M, rtol=0)


def seg(p0, p1, r):
    return Segment(np.array(p0, float)[:, None], np.array(p1, float)[:, None], r)


def test_parallel_capsules_are_their_axis_gap_less_radii():
    """Analytic: parallel capsules side by side, 0.5 m apart, overlapping along their length:
    0.5 - 0.1 - 0.15; end to end along one line, 0.3 m between the ends: 0.3 - 0.25."""
    side = _primitive_distance(seg([0, 0, 0], [2, 0, 0], 0.1), seg([1, 0.5, 0], [3, 0.5, 0], 0.15))
    assert side[0] == pytest.approx(0.25, abs=1e-15)
    inline = _primitive_distance(seg([0, 0, 0], [1, 0, 0], 0.1), seg([1.3, 0, 0], [2, 0, 0], 0.15))
    assert inline[0] == pytest.approx(0.05, abs=1e-15)


def test_crossing_capsules_are_their_common_normal_less_radii():
    """Analytic: two perpendicular skew capsules crossing 0.4 m apart along z: 0.4 - 0.2;
    crossing through each other (axes meet): minus the sum of the radii."""
    skew = _primitive_distance(seg([-1, 0, 0], [1, 0, 0], 0.1), seg([0, -1, 0.4], [0, 1, 0.4], 0.1))
    assert skew[0] == pytest.approx(0.2, abs=1e-15)
    meet = _primitive_distance(seg([-1, 0, 0], [1, 0, 0], 0.1), seg([0, -1, 0], [0, 1, 0], 0.05))
    assert meet[0] == pytest.approx(-0.15, abs=1e-15)


def test_capsule_touching_a_plane_is_at_zero():
    """Analytic: a capsule lying on the floor z = 0 (axis at its radius) is at 0; tilted with
    its low end 0.1 m deep it is at -0.1."""
    floor = HalfSpace(np.zeros((3, 1)), np.array([[0.0], [0.0], [1.0]]))
    lying = _primitive_distance(seg([0, 0, 0.2], [1, 1, 0.2], 0.2), floor)
    assert lying[0] == pytest.approx(0.0, abs=1e-15)
    tilted = _primitive_distance(seg([0, 0, 0.1], [0, 1, 2.0], 0.2), floor)
    assert tilted[0] == pytest.approx(-0.1, abs=1e-15)


def test_point_inside_a_box_is_minus_its_depth():
    """Analytic: a sphere's centre 0.1 m inside the nearest face of a box is at -(0.1 + r)."""
    box = OrientedBox(np.zeros((3, 1)), np.eye(3)[:, :, None], np.array([1.0, 0.5, 0.3]))
    inside = _primitive_distance(seg([0.2, 0.4, 0.0], [0.2, 0.4, 0.0], 0.05), box)
    assert inside[0] == pytest.approx(-0.15, abs=1e-15)


def _dense_segment_distance(p0, p1, q0, q1, count=20_001) -> float:
    """Least exact point-to-segment distance over dense points of either segment: an upper
    bound on the true distance, within a hair of it for nearly parallel segments."""
    s = np.linspace(0.0, 1.0, count)[:, None]
    best = np.inf
    for a0, a1, b0, b1 in ((p0, p1, q0, q1), (q0, q1, p0, p1)):
        points = a0 + s * (a1 - a0)
        step = b1 - b0
        along = np.clip((points - b0) @ step / (step @ step), 0.0, 1.0)
        best = min(best, np.linalg.norm(points - (b0 + along[:, None] * step), axis=1).min())
    return float(best)


def test_nearly_parallel_segments_keep_full_precision():
    """Segments at 1e-2 to 1e-13 rad from parallel (where the line solution loses digits to
    cancellation) and exactly parallel: never above the dense point-to-segment bound, and
    within 1e-12 m of it."""
    rng = np.random.default_rng(1209)
    for angle in (1e-2, 1e-5, 1e-8, 1e-9, 1e-10, 1e-13, 0.0):
        for _ in range(20):
            p0, u = rng.normal(size=3), rng.normal(size=3)
            u /= np.linalg.norm(u)
            side = np.cross(u, rng.normal(size=3))
            v = u + angle * side / np.linalg.norm(side)
            p1 = p0 + rng.uniform(0.2, 2.0) * u
            q0 = p0 + rng.normal(0.0, 0.5, 3)
            q1 = q0 + rng.uniform(0.2, 2.0) * v / np.linalg.norm(v)
            ours = segment_segment(p0[:, None], p1[:, None], q0[:, None], q1[:, None])[0]
            dense = _dense_segment_distance(p0, p1, q0, q1)
            assert ours <= dense + 1e-15
            assert ours == pytest.approx(dense, abs=1e-12)
