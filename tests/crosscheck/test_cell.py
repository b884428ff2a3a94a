"""`trilane cell --json` checked against coupled-mode equations integrated
here with scipy.

Only the design inputs are read from trilane: a cell's gaps, bend and length
(or a coupler's gap, straight, bend radius and reach) and the process's
coupling table, neff and wavelength, which together define the problem.
Every reference number is then computed by this file:

- coupled-mode theory, A. Yariv, IEEE J. Quantum Electron. 9, 919 (1973):
  d a/dz = -i H(z) a, with H the couplings between neighbouring guides and
  the rails' own phase detuning on the diagonal;
- the rails' path detuning of a bent guide: a guide whose centre line has
  slope t = dx/dz covers sqrt(1 + t^2) dz of path per dz of length, so it
  picks up beta (sqrt(1 + t^2) - 1) extra phase per um against a straight
  one (plain geometry; beta = 2 pi neff / lambda);
- the smooth coupling law is our own natural cubic spline of ln k through
  the table (C. de Boor, A Practical Guide to Splines, Springer 1978,
  chapter IV: second derivatives from the tridiagonal system, zero at both
  ends), continued by straight lines in ln k with the end slopes; it is
  checked against scipy.interpolate.CubicSpline(bc_type="natural");
- the ODE solver is scipy.integrate.solve_ivp, DOP853 (Hairer, Norsett &
  Wanner, Solving Ordinary Differential Equations I, 2nd ed., 1993), rtol
  1e-11, atol 1e-12, integrated piecewise between the points where the
  coupling's higher derivatives jump (spline knots, straight/bend joins);
  the integrator itself is first checked against closed forms and
  scipy.linalg.expm;
- the holonomic gate the geometric cell aims at, E. Sjoqvist et al., New J.
  Phys. 14, 103035 (2012): S(theta) = [[cos t, -sin t], [-sin t, -cos t]]
  on the rails, the auxiliary guide left dark;
- the two-guide coupler: H(z) = k(z) sigma_x commutes with itself along z,
  so U = exp(-i Phi sigma_x) with Phi = int k dz and the cross power is
  sin^2 Phi (Yariv 1973), with Phi from scipy.integrate.quad.

The whole file runs in a few seconds.
"""

import json
import math

import numpy as np
import pytest
from scipy.integrate import quad, solve_ivp
from scipy.interpolate import CubicSpline
from scipy.linalg import expm

RTOL, ATOL = 1e-11, 1e-12

# --------------------------------------------------------------------------
# Our own smooth law: natural cubic spline of ln k, linear beyond the table
# (de Boor 1978, ch. IV; the contract of docs/process.md)
# --------------------------------------------------------------------------


class LnKSpline:
    """k(g) = exp(s(g)), s the natural cubic spline through (gap_nm, ln k),
    continued by straight lines with the end slopes."""

    def __init__(self, gaps, ks):
        x = np.asarray(gaps, float)
        y = np.log(np.asarray(ks, float))
        n = len(x)
        h = np.diff(x)
        # Second derivatives M: M_0 = M_{n-1} = 0 and, inside,
        # h_{i-1} M_{i-1} + 2 (h_{i-1} + h_i) M_i + h_i M_{i+1}
        #   = 6 ((y_{i+1} - y_i) / h_i - (y_i - y_{i-1}) / h_{i-1}).
        a = np.zeros((n, n))
        r = np.zeros(n)
        a[0, 0] = a[-1, -1] = 1.0
        for i in range(1, n - 1):
            a[i, i - 1] = h[i - 1]
            a[i, i] = 2 * (h[i - 1] + h[i])
            a[i, i + 1] = h[i]
            r[i] = 6 * ((y[i + 1] - y[i]) / h[i] - (y[i] - y[i - 1]) / h[i - 1])
        m = np.linalg.solve(a, r)
        self.x, self.y, self.h, self.m = x, y, h, m
        self.slope0 = (y[1] - y[0]) / h[0] - h[0] * (2 * m[0] + m[1]) / 6
        self.slope1 = (y[-1] - y[-2]) / h[-1] + h[-1] * (m[-2] + 2 * m[-1]) / 6

    def ln_k(self, g):
        g = np.asarray(g, float)
        x, y, h, m = self.x, self.y, self.h, self.m
        i = np.clip(np.searchsorted(x, g, side="right") - 1, 0, len(x) - 2)
        hi = h[i]
        u = (x[i + 1] - g) / hi
        v = (g - x[i]) / hi
        s = u * y[i] + v * y[i + 1] + hi * hi / 6 * ((u**3 - u) * m[i] + (v**3 - v) * m[i + 1])
        s = np.where(g < x[0], y[0] + self.slope0 * (g - x[0]), s)
        return np.where(g > x[-1], y[-1] + self.slope1 * (g - x[-1]), s)

    def k(self, g):
        return np.exp(self.ln_k(g))


# --------------------------------------------------------------------------
# Our own integrator: solve_ivp on the whole transfer matrix at once
# --------------------------------------------------------------------------


def propagate(hamiltonian, z0, z1, n, breaks=()):
    """U(z1, z0) of d U/dz = -i H(z) U, U(z0) = 1 (Yariv 1973), integrated
    piecewise between the sorted `breaks` inside (z0, z1)."""
    pts = [z0, *sorted(b for b in set(breaks) if z0 + 1e-12 < b < z1 - 1e-12), z1]
    y = np.eye(n, dtype=complex).ravel()

    def rhs(z, yy):
        return (-1j * hamiltonian(z) @ yy.reshape(n, n)).ravel()

    for a, b in zip(pts[:-1], pts[1:]):
        sol = solve_ivp(rhs, (a, b), y, method="DOP853", rtol=RTOL, atol=ATOL)
        assert sol.success, sol.message
        y = sol.y[:, -1]
    return y.reshape(n, n)


def unitarity_error(u):
    return float(np.max(np.abs(u.conj().T @ u - np.eye(len(u)))))


# --------------------------------------------------------------------------
# The problems, restated from the contract
# --------------------------------------------------------------------------


def knot_crossings(g0, b, z_mid, knots):
    """z where g0 + b (z - z_mid)^2 equals a knot gap."""
    out = []
    for g in knots:
        if g > g0:
            d = math.sqrt((g - g0) / b)
            out += [z_mid - d, z_mid + d]
    return out


def geometric_transfer(cell, proc):
    """The three-guide cell (upper rail, auxiliary, lower rail)."""
    law = spline_of(proc)
    b = cell["bend_per_m"] / 1000  # nm / um^2
    length = cell["length_um"]
    mid = length / 2
    gu, gl = cell["gap_upper_nm"], cell["gap_lower_nm"]
    beta = 2 * math.pi * proc["neff"] / proc["wavelength_um"]

    def ham(z):
        s = z - mid
        ku, kl = law.k(np.array([gu + b * s * s, gl + b * s * s]))
        t = 2 * b * s * 1e-3  # dg/dz in nm/um -> um/um
        # beta (sqrt(1 + t^2) - 1), written without cancellation
        d = beta * t * t / (math.sqrt(1 + t * t) + 1)
        return np.array([[d, ku, 0.0], [ku, 0.0, kl], [0.0, kl, d]])

    breaks = knot_crossings(gu, b, mid, law.x) + knot_crossings(gl, b, mid, law.x)
    return propagate(ham, 0.0, length, 3, breaks)


def coupler_gap(c):
    """g(z) of the two-guide coupler: bend in, straight, bend out."""
    r, st, big_r, g0 = c["bend_reach_um"], c["straight_um"], c["bend_radius_um"], c["gap_nm"]

    def gap(z):
        if z < r:
            x = r - z
        elif z <= r + st:
            x = 0.0
        else:
            x = z - r - st
        return g0 + x * x / big_r * 1e3

    # joins, and where the bends' gap crosses a spline knot
    breaks = [r, r + st]
    return gap, breaks, r, st, big_r, g0


def coupler_transfer(c, proc):
    law = spline_of(proc)
    gap, breaks, r, st, big_r, g0 = coupler_gap(c)
    for g in law.x:
        if g > g0:
            x = math.sqrt((g - g0) * big_r / 1e3)
            breaks += [r - x, r + st + x]

    def ham(z):
        k = float(law.k(gap(z)))
        return np.array([[0.0, k], [k, 0.0]])

    return propagate(ham, 0.0, c["length_um"], 2, breaks), breaks


def complex_matrix(m):
    return np.array(m["re"]) + 1j * np.array(m["im"])


def spline_of(proc):
    t = proc["coupling"]["table"]
    return LnKSpline([e["gap_nm"] for e in t], [e["k_per_um"] for e in t])


# --------------------------------------------------------------------------
# Fixtures
# --------------------------------------------------------------------------


@pytest.fixture(scope="module")
def run_json(trilane):
    cache = {}

    def get(*args):
        if args not in cache:
            r = trilane(*args, "--json")
            assert r.returncode == 0, r.stderr
            cache[args] = json.loads(r.stdout)
        return cache[args]

    return get


# --------------------------------------------------------------------------
# Our own tools against closed forms first
# --------------------------------------------------------------------------


def test_own_integrator_reproduces_the_closed_form_three_guide_solution():
    # Yariv (1973): three guides, constant k1 (upper-aux), k2 (aux-lower),
    # no detuning; eigenvalues 0, +-W, W = sqrt(k1^2 + k2^2).
    k1, k2, z = 0.0731, 0.1187, 41.3
    w = math.hypot(k1, k2)
    u = propagate(lambda _z: np.array([[0, k1, 0], [k1, 0, k2], [0, k2, 0]], float), 0.0, z, 3, [z / 3])
    c, s = math.cos(w * z), math.sin(w * z)
    closed = np.array(
        [
            [(k2**2 + k1**2 * c) / w**2, -1j * k1 * s / w, k1 * k2 * (c - 1) / w**2],
            [-1j * k1 * s / w, c, -1j * k2 * s / w],
            [k1 * k2 * (c - 1) / w**2, -1j * k2 * s / w, (k1**2 + k2**2 * c) / w**2],
        ]
    )
    assert np.max(np.abs(u - closed)) < 1e-10
    assert abs(u[1, 1] - c) < 1e-10
    assert abs(u[0, 1] + 1j * k1 * s / w) < 1e-10
    assert abs(u[0, 0] - (k2**2 + k1**2 * c) / w**2) < 1e-10
    assert abs(u[0, 2] - k1 * k2 * (c - 1) / w**2) < 1e-10
    assert unitarity_error(u) < 1e-10


def test_own_integrator_with_detuning_and_z_dependence():
    # Constant detuning on the rails: U = expm(-i H z) (scipy.linalg.expm).
    k1, k2, d, z = 0.05, 0.09, 0.013, 57.0
    h0 = np.array([[d, k1, 0], [k1, 0, k2], [0, k2, d]])
    u = propagate(lambda _z: h0, 0.0, z, 3)
    assert np.max(np.abs(u - expm(-1j * h0 * z))) < 1e-10
    # H(z) = f(z) H0 commutes with itself: U = expm(-i F(z) H0), F = int f
    # (Yariv 1973; F in closed form), f with a jump in its derivative at the
    # break, as the coupler has.
    def f(zz):
        return 1 + 0.4 * math.cos(0.21 * zz) if zz < 20 else 1 + 0.4 * math.cos(4.2) - 0.01 * (zz - 20)

    big_f = 20 + 0.4 / 0.21 * math.sin(4.2) + (1 + 0.4 * math.cos(4.2)) * (z - 20) - 0.005 * (z - 20) ** 2
    u = propagate(lambda zz: f(zz) * h0, 0.0, z, 3, [20.0])
    assert np.max(np.abs(u - expm(-1j * big_f * h0))) < 1e-10


@pytest.mark.parametrize("name", ["si220_wire", "sin400_strip"])
def test_own_spline_is_the_natural_cubic_spline(run_json, name):
    # de Boor (1978): our spline against scipy's natural CubicSpline inside
    # the table; outside, straight lines with the end slopes; C2 at the ends.
    proc = run_json("process", name)
    law = spline_of(proc)
    ref = CubicSpline(law.x, law.y, bc_type="natural")
    g = np.linspace(law.x[0], law.x[-1], 2001)
    assert np.max(np.abs(law.ln_k(g) - ref(g))) < 1e-12
    assert np.max(np.abs(law.ln_k(law.x) - law.y)) < 1e-12
    assert abs(law.slope0 - ref(law.x[0], 1)) < 1e-12
    assert abs(law.slope1 - ref(law.x[-1], 1)) < 1e-12
    # C2 at the ends: the spline's curvature is zero there and the lines
    # continue its value and slope.
    for g0, slope in ((law.x[0], law.slope0), (law.x[-1], law.slope1)):
        assert abs(ref(g0, 2)) < 1e-12
        for dg in (-1e-4, 1e-4):
            assert abs(law.ln_k(g0 + dg) - (ref(g0) + slope * dg)) < 1e-12
    below = law.x[0] - 75.0
    above = law.x[-1] + 250.0
    assert abs(law.ln_k(below) - (law.y[0] - 75.0 * law.slope0)) < 1e-12
    assert abs(law.ln_k(above) - (law.y[-1] + 250.0 * law.slope1)) < 1e-12


# --------------------------------------------------------------------------
# Geometric cells
# --------------------------------------------------------------------------

GEOMETRIC = [
    ("si220_wire", 0.3),
    ("si220_wire", math.pi / 4),
    ("si220_wire", 1.2),
    ("sin400_strip", 0.3),
]


@pytest.mark.parametrize("process,theta", GEOMETRIC)
def test_geometric_cell_transfer_matches_own_integration(run_json, process, theta):
    proc = run_json("process", process)
    cell = run_json("cell", "--theta", repr(theta), "--process", process)
    assert cell["kind"] == "geometric"
    assert abs(cell["theta"] - theta) < 1e-15
    u = geometric_transfer(cell, proc)

    # Yariv (1973): the same equations, our solver, every complex entry.
    theirs = complex_matrix(cell["transfer"])
    assert np.max(np.abs(u - theirs)) < 1e-8, np.abs(u - theirs)
    rails = [0, 2]
    assert np.max(np.abs(complex_matrix(cell["rail_block"]) - u[np.ix_(rails, rails)])) < 1e-8
    # Unitarity: H is Hermitian, so U is unitary (our own U).
    assert unitarity_error(u) < 1e-9

    # Sjoqvist et al. (2012): the rail block's moduli are those of S(theta)
    # to the refinement target 1e-6, the auxiliary guide dark for a rail input.
    c, s = math.cos(theta), math.sin(theta)
    target = np.abs(np.array([[c, -s], [-s, -c]]))
    assert np.max(np.abs(np.abs(u[np.ix_(rails, rails)]) - target)) < 1e-6
    for j in rails:
        assert abs(u[1, j]) ** 2 < 1e-6
    # trilane's figures of merit, as its summary defines them, recomputed on
    # our transfer: leakage the largest power left in the auxiliary guide,
    # split_error the largest modulus difference from S(theta).
    assert abs(cell["leakage"] - max(abs(u[1, j]) ** 2 for j in rails)) < 1e-10
    assert abs(cell["split_error"] - np.max(np.abs(np.abs(u[np.ix_(rails, rails)]) - target))) < 1e-9


# --------------------------------------------------------------------------
# Directional couplers
# --------------------------------------------------------------------------


@pytest.mark.parametrize("split", [0.5, 0.2])
def test_coupler_transfer_matches_own_integration(run_json, split):
    proc = run_json("process", "si220_wire")
    c = run_json("cell", "--split", repr(split), "--cell", "coupler")
    assert c["kind"] == "coupler"
    r, st = c["bend_reach_um"], c["straight_um"]
    assert abs(c["length_um"] - (st + 2 * r)) < 1e-12
    u, breaks = coupler_transfer(c, proc)

    # Yariv (1973), our solver: the 2x2 transfer and the split.
    theirs = complex_matrix(c["rail_block"])
    assert np.max(np.abs(u - theirs)) < 1e-8, np.abs(u - theirs)
    assert abs(abs(u[0, 1]) ** 2 - split) < 1e-8
    assert abs(abs(u[1, 0]) ** 2 - split) < 1e-8
    assert unitarity_error(u) < 1e-9

    # H = k(z) sigma_x commutes along z: U = exp(-i Phi sigma_x), Phi = int k
    # (Yariv 1973), Phi by scipy.integrate.quad over the same pieces.
    law = spline_of(proc)
    gap = coupler_gap(c)[0]
    pts = [0.0, *sorted(b for b in breaks if 0 < b < c["length_um"]), c["length_um"]]
    phi = sum(
        quad(lambda z: float(law.k(gap(z))), a, b, epsabs=1e-14, epsrel=1e-13)[0] for a, b in zip(pts[:-1], pts[1:])
    )
    exact = np.array([[math.cos(phi), -1j * math.sin(phi)], [-1j * math.sin(phi), math.cos(phi)]])
    assert np.max(np.abs(u - exact)) < 1e-9
    assert abs(math.sin(phi) ** 2 - split) < 1e-8


# --------------------------------------------------------------------------
# Mach-Zehnder interferometers
# --------------------------------------------------------------------------


@pytest.mark.parametrize("theta", [0.3, 1.1])
def test_mzi_is_two_couplers_around_its_phase(run_json, theta):
    # Born & Wolf, Principles of Optics (1999) section 7.5: U = C P C with
    # P = diag(e^{i phi}, 1); for 50:50 couplers |U_lu|^2 = cos^2(phi / 2),
    # so phi = pi - 2 theta. Each coupler re-integrated here from its
    # geometry on the process's own spline.
    proc = run_json("process", "si220_wire")
    m = run_json("cell", "--theta", repr(theta), "--cell", "mzi", "--samples", "0")
    assert m["kind"] == "mzi"
    c, _ = coupler_transfer(m["coupler"], proc)
    p = np.diag([np.exp(1j * m["phase_rad"]), 1.0])
    u = c @ p @ c
    assert np.max(np.abs(u - complex_matrix(m["rail_block"]))) < 1e-8
    assert abs(abs(u[1, 0]) ** 2 - math.sin(theta) ** 2) < 1e-8
    assert abs(m["phase_rad"] - (math.pi - 2 * theta)) < 1e-3
    assert abs(m["length_um"] - 2 * m["coupler"]["length_um"] - m["arm_um"]) < 1e-9


def test_sweep_figure_parses_as_svg(trilane, tmp_path):
    # The --sweep figure is well-formed XML (xml.etree) with three panels'
    # plotted series; no half-written file on a bad name.
    out = tmp_path / "sweep.svg"
    r = trilane("cell", "--theta", "0.7854", "--samples", "0", "--sweep", str(out))
    assert r.returncode == 0, r.stderr
    import xml.etree.ElementTree as ET

    root = ET.parse(out).getroot()
    assert root.tag.endswith("svg")
    texts = "".join(t.text or "" for t in root.iter() if t.tag.endswith("text"))
    for caption in ("cross power vs gap difference", "power left in the auxiliary guide", "1 - F against edge bias"):
        assert caption in texts
    lines = [e for e in root.iter() if e.tag.endswith("polyline")]
    assert len(lines) >= 4
