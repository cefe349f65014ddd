"""Array rotations and transforms against scipy.spatial.transform.Rotation (the outside reference).

Our RPY convention R = Rz(yaw)·Ry(pitch)·Rx(roll) is scipy's intrinsic from_euler("ZYX",
[yaw, pitch, roll]); scipy quaternions are taken scalar-first (scalar_first=True).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from reachgate.model.transforms import (
    cos_sin,
    invert_transform,
    matrix_to_quat,
    matrix_to_rpy,
    quat_to_matrix,
    rotation_angle,
    rotation_log,
    rpy_to_matrix,
    transform,
    transform_from_xyz_rpy,
)


def random_rotations(seed: int, n: int = 1000) -> Rotation:
    return Rotation.random(n, random_state=seed)


def test_rpy_to_matrix_matches_scipy_zyx():
    rng = np.random.default_rng(31)
    rpy = rng.uniform(-np.pi, np.pi, size=(1000, 3))
    expected = Rotation.from_euler("ZYX", rpy[:, ::-1]).as_matrix()
    np.testing.assert_allclose(rpy_to_matrix(rpy), expected, atol=1e-14)


def test_rpy_to_matrix_keeps_leading_batch_dimensions():
    rpy = np.random.default_rng(32).uniform(-1, 1, size=(4, 5, 3))
    assert rpy_to_matrix(rpy).shape == (4, 5, 3, 3)
    np.testing.assert_allclose(rpy_to_matrix(rpy)[2, 3], rpy_to_matrix(rpy[2, 3]), atol=0)


def test_matrix_to_rpy_round_trips_and_matches_scipy_angles():
    rng = np.random.default_rng(33)
    rpy = np.column_stack(
        [rng.uniform(-3.1, 3.1, 1000), rng.uniform(-1.5, 1.5, 1000), rng.uniform(-3.1, 3.1, 1000)]
    )
    back = matrix_to_rpy(rpy_to_matrix(rpy))
    np.testing.assert_allclose(back, rpy, atol=1e-12)
    scipy_ypr = Rotation.from_matrix(rpy_to_matrix(rpy)).as_euler("ZYX")
    np.testing.assert_allclose(back, scipy_ypr[:, ::-1], atol=1e-12)


def test_matrix_to_rpy_at_gimbal_lock_still_rebuilds_the_rotation():
    rpy = np.array([[0.4, np.pi / 2, -0.3], [0.2, -np.pi / 2, 1.1]])
    R = rpy_to_matrix(rpy)
    back = matrix_to_rpy(R)
    assert np.all(back[:, 0] == 0.0)  # documented: roll set to 0, yaw carries the rotation
    np.testing.assert_allclose(rpy_to_matrix(back), R, atol=1e-12)


def test_quat_to_matrix_matches_scipy():
    rotations = random_rotations(34)
    q = rotations.as_quat(scalar_first=True)
    np.testing.assert_allclose(quat_to_matrix(q), rotations.as_matrix(), atol=1e-14)


def test_matrix_to_quat_matches_scipy_up_to_sign_and_has_qw_non_negative():
    rotations = random_rotations(35)
    q = matrix_to_quat(rotations.as_matrix())
    expected = rotations.as_quat(scalar_first=True)
    expected *= np.where(expected[:, :1] < 0, -1.0, 1.0)
    np.testing.assert_allclose(q, expected, atol=1e-13)
    assert (q[:, 0] >= 0).all()
    np.testing.assert_allclose(np.linalg.norm(q, axis=1), 1.0, atol=1e-15)


@pytest.mark.parametrize("axis", [[1.0, 0, 0], [0, 1.0, 0], [0, 0, 1.0], [1.0, -2.0, 0.5]])
def test_matrix_to_quat_is_accurate_near_half_turns(axis):
    # Near π the trace branch loses accuracy; the largest-pivot branches must take over.
    axis = np.asarray(axis) / np.linalg.norm(axis)
    angles = np.pi - np.array([0.0, 1e-9, 1e-5, 1e-2])
    rotations = Rotation.from_rotvec(angles[:, None] * axis)
    q = matrix_to_quat(rotations.as_matrix())
    np.testing.assert_allclose(quat_to_matrix(q), rotations.as_matrix(), atol=1e-14)


def test_quaternion_matrix_round_trip():
    q = random_rotations(36).as_quat(scalar_first=True)
    q *= np.where(q[:, :1] < 0, -1.0, 1.0)
    np.testing.assert_allclose(matrix_to_quat(quat_to_matrix(q)), q, atol=1e-14)


def test_transform_and_inverse_compose_to_identity():
    rng = np.random.default_rng(37)
    R = random_rotations(37, 200).as_matrix()
    p = rng.normal(size=(200, 3))
    T = transform(R, p)
    np.testing.assert_allclose(
        T @ invert_transform(T), np.broadcast_to(np.eye(4), T.shape), atol=1e-14
    )
    point = rng.normal(size=3)
    np.testing.assert_allclose(T[:, :3, :3] @ point + p, (T @ np.append(point, 1.0))[:, :3])


def test_transform_from_xyz_rpy_matches_scipy():
    T = transform_from_xyz_rpy([1.0, -2.0, 0.5], np.radians([10.0, 20.0, 30.0]))
    expected = Rotation.from_euler("ZYX", [30.0, 20.0, 10.0], degrees=True).as_matrix()
    np.testing.assert_allclose(T[:3, :3], expected, atol=1e-15)
    np.testing.assert_array_equal(T[:3, 3], [1.0, -2.0, 0.5])
    np.testing.assert_array_equal(T[3], [0.0, 0.0, 0.0, 1.0])


def test_rotation_angle_and_log_match_scipy_rotvec():
    rotations = random_rotations(38)
    rotvec = rotations.as_rotvec()
    keep = np.linalg.norm(rotvec, axis=1) < np.pi - 1e-6  # documented range of rotation_log
    R = rotations.as_matrix()
    np.testing.assert_allclose(rotation_angle(R), np.linalg.norm(rotvec, axis=1), atol=1e-12)
    np.testing.assert_allclose(rotation_log(R[keep]), rotvec[keep], atol=1e-9)


def test_rotation_log_is_exact_for_tiny_angles():
    rotvec = np.array([[1e-12, -2e-12, 3e-13], [0.0, 0.0, 0.0], [1e-7, 0.0, 0.0]])
    R = Rotation.from_rotvec(rotvec).as_matrix()
    np.testing.assert_allclose(rotation_log(R), rotvec, rtol=1e-6, atol=1e-20)


def test_cos_sin_from_the_half_angle_tangent_match_numpy_to_rounding():
    """Analytic: cos θ = (1 - t²)/(1 + t²), sin θ = 2t/(1 + t²) with t = tan(θ/2); checked
    against np.cos / np.sin over several turns, at 0, and within 1e-15 of ±π."""
    rng = np.random.default_rng(2611)
    theta = np.concatenate(
        [
            rng.uniform(-4 * np.pi, 4 * np.pi, 100_000),
            [0.0, np.pi, -np.pi, 3 * np.pi],
            np.pi - np.logspace(-15, -1, 50),
            -np.pi + np.logspace(-15, -1, 50),
        ]
    )
    c, s = cos_sin(theta)
    np.testing.assert_allclose(c, np.cos(theta), rtol=0, atol=1e-15)
    np.testing.assert_allclose(s, np.sin(theta), rtol=0, atol=1e-15)
