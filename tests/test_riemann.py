"""Checks of the exact Riemann solver (solver.riemann).

Sources (keys as in tests/data/README.md):
  [T] E. F. Toro, "Riemann Solvers and Numerical Methods for Fluid Dynamics", 3rd ed., Springer, 2009, ch. 4:
      the five test problems of sec. 4.3.3 and their exact star values (table number from memory).
  [S] G. A. Sod, J. Comput. Phys. 27 (1978) 1-31 (initial data of Test 1).
  [N] NACA Report 1135 (normal-shock relations, used for a cross-check of the shock strength).
Values are read from tests/data/check_values.csv (copied from the team reference set, sources in each row): ``value_full`` is compared tightly, the published
figure at the precision it is printed with. Self-consistency checks (Rankine-Hugoniot, isentropic fan) use only
the conservation laws.
"""
from __future__ import annotations

import csv
import math
import re
from pathlib import Path

import numpy as np
import pytest

from shockslate.solver import relations
from shockslate.solver.riemann import StarState, exact_solution, sample, star_state, wave_speeds

CSV_PATH = Path(__file__).resolve().parent / "data" / "check_values.csv"
GAMMA = 1.4
FIELD = {"p*": "p", "u*": "u", "rho*L": "rho_l", "rho*R": "rho_r"}

SOD = ((1.0, 0.0, 1.0), (0.125, 0.0, 0.1))
TORO_TESTS = {  # Toro 2009, sec. 4.3.3 (Test 1 is Sod's problem)
    1: SOD,
    2: ((1.0, -2.0, 0.4), (1.0, 2.0, 0.4)),
    3: ((1.0, 0.0, 1000.0), (1.0, 0.0, 0.01)),
    4: ((1.0, 0.0, 0.01), (1.0, 0.0, 100.0)),
    5: ((5.99924, 19.5975, 460.894), (5.99242, -6.19633, 46.095)),
}


def _riemann_rows() -> list[dict[str, str]]:
    with CSV_PATH.open(newline="") as fh:
        return [row for row in csv.DictReader(fh) if row["group"] == "Riemann"]


def _numbers(text: str) -> list[float]:
    return [float(v) for v in re.findall(r"-?\d+(?:\.\d+)?(?:[eE][-+]?\d+)?", text)]


def _parse_toro_row(row: dict[str, str]):
    """-> (test number, field name, left, right) for the rows 'Toro Test N (...): q' with their inputs."""
    match = re.match(r"Toro Test (\d) \(.*\): (\S+)$", row["quantity"])
    if match is None:
        return None
    n = _numbers(row["inputs"])
    # inputs: "rhoL,uL,pL=a,b,c; rhoR,uR,pR=d,e,f; g=1.4"
    left, right, gamma = tuple(n[0:3]), tuple(n[3:6]), n[6]
    assert gamma == GAMMA
    return int(match.group(1)), match.group(2), left, right


TORO_ROWS = [r for r in _riemann_rows() if _parse_toro_row(r) is not None]


def _assert_printed(value: float, printed: str) -> None:
    decimals = len(printed.split(".")[1]) if "." in printed else 0
    assert abs(value - float(printed)) <= 0.5 * 10.0 ** (-decimals) * (1.0 + 1e-9), (value, printed)


def test_reference_file_has_all_toro_rows():
    assert len(TORO_ROWS) == 20  # 5 tests x (p*, u*, rho*L, rho*R)


@pytest.mark.parametrize("row", TORO_ROWS, ids=[r["quantity"] for r in TORO_ROWS])
def test_toro_star_values(row):
    # Toro 2009, sec. 4.3.3: exact star values of Tests 1-5
    number, quantity, left, right = _parse_toro_row(row)
    assert (left, right) == TORO_TESTS[number]
    value = getattr(star_state(left, right, GAMMA), FIELD[quantity])
    assert value == pytest.approx(float(row["value_full"]), rel=1e-9, abs=1e-12)
    if number != 5:  # Test 5's printed figures come from unrounded inputs; see test_toro_test5_unrounded_inputs
        _assert_printed(value, row["published_value"])
    else:
        assert value == pytest.approx(float(row["published_value"]), rel=5e-5)  # 5 significant figures


def test_toro_test5_unrounded_inputs():
    # Toro 2009, sec. 4.3.3: Test 5 fed with the unrounded star states of Tests 3 and 4 reproduces the printed
    # 1691.64 / 8.68975 (reference README note).
    rows = {r["quantity"].split(",")[0]: r for r in _riemann_rows() if "UNROUNDED" in r["quantity"]}
    left = tuple(_numbers(rows["Toro Test 5 p*"]["inputs"])[0:3])
    right = tuple(_numbers(rows["Toro Test 5 p*"]["inputs"])[3:6])
    star = star_state(left, right, GAMMA)
    assert star.p == pytest.approx(float(rows["Toro Test 5 p*"]["value_full"]), rel=1e-9)
    assert star.u == pytest.approx(float(rows["Toro Test 5 u*"]["value_full"]), rel=1e-9)
    _assert_printed(star.p, rows["Toro Test 5 p*"]["published_value"])
    _assert_printed(star.u, rows["Toro Test 5 u*"]["published_value"])


def test_sod_wave_speeds():
    # Sod 1978 data; Toro 2009 ch. 4 wave-speed relations (values from the reference CSV and README)
    values = {r["quantity"]: float(r["value_full"]) for r in _riemann_rows() if r["quantity"].startswith("Sod")}
    waves = wave_speeds(*SOD, GAMMA)
    assert not waves.left_is_shock and waves.right_is_shock
    assert waves.left_head == pytest.approx(values["Sod: rarefaction head speed SHL = -aL"], rel=1e-12)
    assert waves.left_tail == pytest.approx(values["Sod: rarefaction tail speed STL = u* - a*L"], rel=1e-9)
    assert waves.contact == pytest.approx(0.927453, abs=5e-7)  # reference README, 6 decimals
    assert waves.right_head == pytest.approx(values["Sod: right shock speed SR"], rel=1e-9)
    assert waves.right_tail == waves.right_head
    a_r = math.sqrt(GAMMA * 0.1 / 0.125)
    assert waves.right_head / a_r == pytest.approx(values["Sod: shock Mach number SR/aR"], rel=1e-9)


def test_sod_profile_jumps_where_the_waves_are():
    # Sod 1978 data, x0 = 0.5, t = 0.2: each state region sits between the wave positions x0 + S t.
    x0, t = 0.5, 0.2
    waves = wave_speeds(*SOD, GAMMA)
    star = star_state(*SOD, GAMMA)
    eps = 1e-9
    probes = {
        "left": x0 + waves.left_head * t - eps,
        "left star": x0 + waves.left_tail * t + eps,
        "left star at contact": x0 + waves.contact * t - eps,
        "right star": x0 + waves.contact * t + eps,
        "right star at shock": x0 + waves.right_head * t - eps,
        "right": x0 + waves.right_head * t + eps,
    }
    rho, u, p = exact_solution(*SOD, GAMMA, np.array(list(probes.values())), x0, t)
    expected = [
        SOD[0],
        (star.rho_l, star.u, star.p),
        (star.rho_l, star.u, star.p),
        (star.rho_r, star.u, star.p),
        (star.rho_r, star.u, star.p),
        SOD[1],
    ]
    for i, state in enumerate(expected):
        np.testing.assert_allclose((rho[i], u[i], p[i]), state, rtol=1e-6, err_msg=list(probes)[i])


def test_sod_shock_strength_agrees_with_normal_shock_relations():
    # NACA Report 1135 normal-shock relations in the frame of the moving shock: p*/pR and rho*R/rhoR at Ms = S/aR.
    waves = wave_speeds(*SOD, GAMMA)
    star = star_state(*SOD, GAMMA)
    shock = relations.normal_shock(waves.right_head / math.sqrt(GAMMA * 0.1 / 0.125), gamma=GAMMA)
    assert star.p / 0.1 == pytest.approx(shock.p2_p1, rel=1e-10)
    assert star.rho_r / 0.125 == pytest.approx(shock.rho2_rho1, rel=1e-10)


# ---------------------------------------------------------------------------------------------------------------
# self-consistency of the sampled solution
# ---------------------------------------------------------------------------------------------------------------
def _fluxes(rho, u, p, s):
    """Mass, momentum and energy flux through a surface moving at speed s (shock frame)."""
    e = p / (GAMMA - 1.0) + 0.5 * rho * u * u
    return np.array([rho * (u - s), rho * u * (u - s) + p, e * (u - s) + p * u])


@pytest.mark.parametrize("number", [1, 3, 4, 5])
def test_sampled_shocks_satisfy_rankine_hugoniot(number):
    # Conservation across each shock in the sampled solution (Toro 2009, sec. 4.3.3 data).
    left, right = TORO_TESTS[number]
    waves = wave_speeds(left, right, GAMMA)
    shocks = [s for s, is_shock in ((waves.left_head, waves.left_is_shock), (waves.right_head, waves.right_is_shock))
              if is_shock]
    assert shocks
    for s in shocks:
        delta = 1e-9 * max(1.0, abs(s))
        rho, u, p = sample(left, right, GAMMA, np.array([s - delta, s + delta]))
        assert rho[0] != pytest.approx(rho[1], rel=1e-3)  # there really is a jump here
        ahead, behind = _fluxes(rho[0], u[0], p[0], s), _fluxes(rho[1], u[1], p[1], s)
        scale = np.abs(ahead) + np.abs(behind) + 1e-300
        assert np.all(np.abs(ahead - behind) <= 1e-9 * scale), (ahead, behind)


@pytest.mark.parametrize("number", [1, 2, 3, 4])
def test_sampled_rarefactions_are_isentropic(number):
    # Inside a fan: p / rho^gamma and the Riemann invariant through the fan stay at their upstream values, and the
    # fan is a centred characteristic family: xi = u - a (left) or u + a (right). Toro 2009, sec. 4.3.3 data.
    left, right = TORO_TESTS[number]
    waves = wave_speeds(left, right, GAMMA)
    checked = 0
    for side, state, head, tail, is_shock, sign in (
        ("left", left, waves.left_head, waves.left_tail, waves.left_is_shock, -1.0),
        ("right", right, waves.right_head, waves.right_tail, waves.right_is_shock, +1.0),
    ):
        if is_shock:
            continue
        rho0, u0, p0 = state
        a0 = math.sqrt(GAMMA * p0 / rho0)
        xi = np.linspace(head, tail, 41)
        rho, u, p = sample(left, right, GAMMA, xi)
        a = np.sqrt(GAMMA * p / rho)
        np.testing.assert_allclose(p / rho**GAMMA, p0 / rho0**GAMMA, rtol=1e-10, err_msg=side)
        # left fan: u + 2a/(g-1) constant; right fan: u - 2a/(g-1) constant
        np.testing.assert_allclose(u - sign * 2.0 * a / (GAMMA - 1.0), u0 - sign * 2.0 * a0 / (GAMMA - 1.0),
                                   rtol=1e-10, atol=1e-12, err_msg=side)
        np.testing.assert_allclose(xi, u + sign * a, rtol=1e-10, atol=1e-12, err_msg=side)
        checked += 1
    assert checked >= 1


def test_mirrored_problem_gives_mirrored_solution():
    # Reflecting x -> -x swaps the states and flips the velocities; the exact solution must follow.
    left, right = TORO_TESTS[3]
    m_left = (right[0], -right[1], right[2])
    m_right = (left[0], -left[1], left[2])
    xi = np.linspace(-30.0, 30.0, 601)
    rho, u, p = sample(left, right, GAMMA, xi)
    rho_m, u_m, p_m = sample(m_left, m_right, GAMMA, -xi)
    # points exactly on a discontinuity can land on either side; compare away from the wave positions
    waves = wave_speeds(left, right, GAMMA)
    edges = np.array([waves.left_head, waves.left_tail, waves.contact, waves.right_tail, waves.right_head])
    away = np.min(np.abs(xi[:, None] - edges[None, :]), axis=1) > 1e-6
    np.testing.assert_allclose(rho_m[away], rho[away], rtol=1e-10)
    np.testing.assert_allclose(u_m[away], -u[away], rtol=1e-10, atol=1e-10)
    np.testing.assert_allclose(p_m[away], p[away], rtol=1e-10)


def test_exact_solution_matches_sample_and_keeps_shape():
    x = np.linspace(0.0, 1.0, 101)
    rho, u, p = exact_solution(*SOD, GAMMA, x, 0.5, 0.25)
    rho_s, u_s, p_s = sample(*SOD, GAMMA, (x - 0.5) / 0.25)
    assert rho.shape == u.shape == p.shape == x.shape
    np.testing.assert_array_equal(rho, rho_s)
    np.testing.assert_array_equal(u, u_s)
    np.testing.assert_array_equal(p, p_s)
    assert isinstance(star_state(*SOD, GAMMA), StarState)


# ---------------------------------------------------------------------------------------------------------------
# bad input
# ---------------------------------------------------------------------------------------------------------------
def test_vacuum_generation_is_refused():
    # Pressure positivity condition (Toro 2009, ch. 4): u_R - u_L < 2 (a_L + a_R)/(gamma - 1).
    left, right = (1.0, -4.0, 0.4), (1.0, 4.0, 0.4)
    with pytest.raises(ValueError, match=r"vacuum.*u_R - u_L = 8\.0.*pressure positivity"):
        star_state(left, right, GAMMA)
    with pytest.raises(ValueError, match="vacuum"):
        sample(left, right, GAMMA, np.zeros(3))


@pytest.mark.parametrize(
    "call, pattern",
    [
        (lambda: star_state((-1.0, 0.0, 1.0), SOD[1]), r"left rho = -1\.0 .*> 0"),
        (lambda: star_state(SOD[0], (0.125, 0.0, 0.0)), r"right p = 0\.0 .*> 0"),
        (lambda: star_state(SOD[0], (0.125, float("inf"), 0.1)), r"right u = inf .*finite"),
        (lambda: star_state(SOD[0], (0.125, 0.1)), r"right = .*\(rho, u, p\)"),
        (lambda: star_state(*SOD, gamma=0.9), r"gamma = 0\.9 .*> 1"),
        (lambda: exact_solution(*SOD, GAMMA, np.zeros(3), 0.5, 0.0), r"t = 0\.0 .*> 0"),
        (lambda: sample(*SOD, GAMMA, np.array([0.0, np.nan])), r"xi .*finite"),
    ],
)
def test_bad_input_raises_a_clear_error(call, pattern):
    with pytest.raises(ValueError, match=pattern):
        call()
