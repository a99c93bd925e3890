"""Placements against scipy.spatial.transform.Rotation and elementary rotation facts."""

import math

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from truepull.geometry.placement import Placement, rotation_z_to
from truepull.geometry.quantities import Measured

RNG = np.random.default_rng(7)


@pytest.mark.parametrize("axis", [[0, 0, 1], [0, 0, -1], [1, 0, 0], [0, -2, 0], [1, 1, 1], [1e-9, 0, -1],
                                  [-3, 2, 0.5]])
def test_axis_takes_z_to_axis_by_a_proper_rotation(axis):
    r = rotation_z_to(axis)
    a = np.asarray(axis, float) / np.linalg.norm(axis)
    np.testing.assert_allclose(r @ [0, 0, 1], a, atol=1e-12)
    np.testing.assert_allclose(r @ r.T, np.eye(3), atol=1e-12)
    assert np.linalg.det(r) == pytest.approx(1.0, abs=1e-12)


def test_axis_rotation_is_the_shortest():
    # the shortest rotation turns about z x a by the angle between them (Rodrigues; elementary)
    a = np.array([1.0, 2.0, 0.5])
    r = rotation_z_to(a)
    angle = np.linalg.norm(Rotation.from_matrix(r).as_rotvec())
    assert angle == pytest.approx(math.acos(a[2] / np.linalg.norm(a)), abs=1e-12)


def test_turn_about_right_handed():
    # a right-handed quarter turn about +z takes +x to +y (elementary)
    p = Placement.turn_about([0, 0, 0], [0, 0, 1], math.pi / 2)
    np.testing.assert_allclose(p.apply([1, 0, 0]), [0, 1, 0], atol=1e-15)
    # about a line through (1, 1, 0): that point stays, (2, 1, 0) goes to (1, 2, 0)
    q = Placement.turn_about([1, 1, 5], [0, 0, 2], math.pi / 2)
    np.testing.assert_allclose(q.apply([[1, 1, 0], [2, 1, 0]]), [[1, 1, 0], [1, 2, 0]], atol=1e-15)


def test_then_and_inverse_match_scipy_composition():
    r1, r2 = Rotation.random(random_state=1), Rotation.random(random_state=2)
    t1, t2 = RNG.normal(size=3), RNG.normal(size=3)
    a, b = Placement(r1.as_matrix(), t1), Placement(r2.as_matrix(), t2)
    pts = RNG.normal(size=(10, 3))
    expected = r2.apply(r1.apply(pts) + t1) + t2  # scipy as the reference
    np.testing.assert_allclose(a.then(b).apply(pts), expected, atol=1e-13)
    np.testing.assert_allclose(a.inverse().apply(a.apply(pts)), pts, atol=1e-13)
    assert a.then(a.inverse()).isclose(Placement.identity())
    np.testing.assert_allclose(a.apply_vector(pts), r1.apply(pts), atol=1e-13)


def test_from_scene_axis_then_rotate_about_at():
    at = [Measured(0.1), Measured(0.2), Measured(-0.3)]
    p = Placement.from_scene(at, axis=[1, 0, 0], rotate_axis=[0, 0, 1], rotate_angle=math.pi / 2)
    # the reference point goes to `at`
    np.testing.assert_allclose(p.apply([0, 0, 0]), [0.1, 0.2, -0.3], atol=1e-15)
    # local z -> x by `axis`, then a quarter turn about z takes x -> y
    np.testing.assert_allclose(p.apply_vector([0, 0, 1]), [0, 1, 0], atol=1e-15)
    plain = Placement.from_scene([1, 2, 3])
    assert plain.isclose(Placement.shift([1, 2, 3]))


def test_arrays_read_only():
    p = Placement.identity()
    with pytest.raises(ValueError):
        p.translation[0] = 1.0
    with pytest.raises(ValueError):
        p.rotation[0, 0] = 2.0


def test_zero_axis_refused():
    with pytest.raises(ValueError):
        rotation_z_to([0, 0, 0])


def test_rotvec_matrix_matches_scipy_rotation():
    # Rodrigues' formula against scipy.spatial.transform.Rotation.from_rotvec (reference library)
    from scipy.spatial.transform import Rotation

    from truepull.geometry.placement import rotvec_matrix

    rng = np.random.default_rng(7)
    for v in [*rng.normal(size=(20, 3)), np.array([np.pi, 0, 0]), np.array([0, 0, 1e-9]), np.zeros(3)]:
        np.testing.assert_allclose(rotvec_matrix(v), Rotation.from_rotvec(v).as_matrix(), atol=1e-15, rtol=0)
