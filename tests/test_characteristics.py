"""Minimum-length nozzle walls by the method of characteristics, planar and axisymmetric.

Sources:
[AM] J. D. Anderson, Modern Compressible Flow, ch. 11: the planar minimum-length nozzle by the method of
     characteristics: the wall leaves the sharp throat corner at nu(M_e)/2, ends parallel to the axis, and its exit
     height tends to the area-Mach value as the characteristics multiply (from memory).
[ZH] M. J. Zucrow and J. D. Hoffman, Gas Dynamics, vol. 1, ch. 12: axisymmetric compatibility relations, used for
     the axisymmetric minimum-length contour (from memory).
[N]  NACA Report 1135 (1953): area-Mach and Prandtl-Meyer relations (through solver.relations, checked against
     the report's tables in tests/test_relations.py).
The simulation runs of these contours are in tests/test_nozzle_design.py.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from shockslate.solver import characteristics as mc
from shockslate.solver import nozzle_design as nd
from shockslate.solver import relations

RT = 0.01
MOC = nd.NozzleSpec(RT, 2.5, 0.02, 2.0, mode="planar", shape="moc", design_gamma=1.4)


def _slope_deg(p, q):
    return math.degrees(math.atan2(q[1] - p[1], q[0] - p[0]))


def test_minimum_length_contour_by_characteristics():
    c = nd.build_contour(MOC)
    r = np.array([p[1] for p in c.points_m])
    assert r.min() == pytest.approx(RT, rel=1e-12) and r[0] == pytest.approx(2.5 * RT, rel=1e-12)
    # [AM] + [N]: the exit height tends to h_t A/A*(M_e); with 200 characteristics within 0.05 %
    assert r[-1] / RT == pytest.approx(2.0, rel=5e-4)
    me = float(relations.mach_from_area_ratio(2.0, 1.4, supersonic=True))
    wall = mc.planar_minimum_length_wall(2.0, 1.4, RT)
    # [AM]: the wall leaves the corner at theta_max = nu(M_e)/2 (the first piece's slope is the mean of theta_max
    # and the first reflected angle) and is parallel to the axis at the exit
    theta_max = 0.5 * float(relations.prandtl_meyer_deg(me, 1.4))
    assert _slope_deg(wall[0], wall[1]) == pytest.approx(theta_max, abs=theta_max / 100)
    assert _slope_deg(wall[-2], wall[-1]) == pytest.approx(0.0, abs=theta_max / 100)
    # more characteristics, closer to the area-Mach value [N]
    errors = [abs(mc.planar_minimum_length_wall(2.0, 1.4, 1.0, n)[-1][1] / 2.0 - 1.0) for n in (7, 30, 120)]
    assert errors[0] > errors[1] > errors[2] and errors[0] < 0.03
    with pytest.raises(nd.DesignError, match="design_gamma is missing"):
        nd.NozzleSpec(RT, 2.5, 0.02, 2.0, mode="planar", shape="moc")


def test_axisymmetric_minimum_length_contour():
    spec = nd.NozzleSpec(RT, 3.0, 0.02, 4.0, shape="moc", design_gamma=1.4)
    c = nd.build_contour(spec)
    pts = np.array(c.points_m)
    r = pts[:, 1]
    # the exit radius comes from the throat's mass flow carried along the last characteristic: the area ratio
    # asked for when the exit flow is uniform at the area-Mach exit Mach number [N]
    assert r.min() == pytest.approx(RT, rel=1e-12) and (r[-1] / RT) ** 2 == pytest.approx(4.0, rel=1e-6)
    k_t = int(np.argmin(r))
    assert np.all(np.diff(r[k_t:]) > 0.0) and np.all(np.diff(pts[:, 0]) >= 0.0)
    # [AM]/[ZH]: the wall turns back towards the axis direction: the last pieces are flatter than the first
    wall = mc.axisymmetric_minimum_length_wall(4.0, 1.4, 1.0)
    assert _slope_deg(wall[-2], wall[-1]) < 0.5 * _slope_deg(wall[0], wall[1])
    # an axisymmetric nozzle reaches a Mach number in a shorter length than a planar one (its area grows with
    # r^2; common practice, no source)
    planar = mc.planar_minimum_length_wall(float(relations.area_ratio(
        float(relations.mach_from_area_ratio(4.0, 1.4, supersonic=True)), 1.4)), 1.4, 1.0)
    assert wall[-1][0] < planar[-1][0]
    # where the net cannot reach the exit Mach number the contour is refused, not drawn wrong
    with pytest.raises(nd.DesignError, match=r"exit_area_ratio = 1.05 is not allowed: the method of characteristics "
                                             r"found no contour"):
        nd.build_contour(nd.NozzleSpec(RT, 3.0, 0.02, 1.05, shape="moc", design_gamma=1.4))
