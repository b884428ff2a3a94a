"""`trilane process si220_wire --json` (the preset's full-vector law) checked
against an independent full-vector finite-difference mode solver written
here with numpy and scipy.sparse.

The solver (our own; trilane's Rust solver was not read):

- Maxwell's curl equations on K. S. Yee's staggered lattice (IEEE Trans.
  Antennas Propag. 14, 302, 1966), fields ~ exp(-i beta z), reduced to an
  eigenproblem P [Ex, Ey] = beta^2 [Ex, Ey] for the transverse *electric*
  field, Ez eliminated through the discrete Gauss law div(eps E) = 0 and Hz
  through the discrete Faraday law: the transverse-E form that Z. Zhu &
  T. G. Brown, Opt. Express 10, 853 (2002) give beside the transverse-H one
  (from memory), re-derived here from Yee's lattice (trilane solves the
  transverse-H form on a graded grid, so the
  two share Maxwell's equations and nothing else);
- a uniform grid in a quarter of the cross-section: the symmetry planes are
  electric (PEC) or magnetic (PMC) walls that select one symmetry class
  (TE-like: PMC at y = 0; even supermode: PEC at x = 0, odd: PMC), the
  outer walls PEC, 0.875 um of cladding beyond the silicon in x and 0.88 um
  in y (moving them out to 1.25 um changes n_eff by < 3e-7, measured);
- permittivity per field component averaged over its Yee cell, harmonic
  along the component and arithmetic across it (A. Farjadpour et al.,
  Opt. Lett. 31, 2972, 2006); every interface lies on a grid line, so in
  practice each component sees the plain or the arithmetic mean;
- the mode nearest a shift by inverse iteration on a sparse LU
  (scipy.sparse.linalg.splu); a symmetry class holds one guided TE-like
  mode (two for three guides: one shift above each), so the nearest one is
  it, and its field must be mostly Ex (asserted);
- convergence: steps (25, 22) nm / d for d = 2, 3, 4, 5 (all interfaces
  on grid lines), extrapolated to zero step by the polynomial
  n0 + a h^2 + b h^3 + c h^4 through the four grids (Richardson
  extrapolation, L. F. Richardson, Phil. Trans. R. Soc. A 210, 307, 1911);
  our error estimate is its distance from the plain h^2 Richardson
  extrapolation of the two finest grids. Derivatives use d = 2, 3, 4.

Our convergence study (d = 1 .. 8, in development, not run here): observed
orders 2.2-2.6 for n_eff (Yee's centred differences are second order; the
corners disturb it), 1.7 for k; extrapolated n_eff 2.445827 (error estimate
7e-6; the 3..8 fit gives 2.445823), k = 0.065438, 0.041454, 0.017217 rad/um
at 150, 200, 300 nm (estimates 1.1e-5, 6e-6, 3e-6, i.e. 0.02 %; the 3..8
fits give 0.065433, 0.041451, 0.017216). trilane: n_eff 2.445832, k =
0.065459, 0.041467, 0.017223 (+0.03 % on ours, inside its stated errors).

Other sources:
- published/independent values: the project's design notes
  (/work/shared/design/checks.md, "computed independently" by someone else
  with numpy/scipy, or "from memory"). Its k column (0.0657, 0.0416,
  0.0173) is 0.35-0.5 % above both full-vector solvers, more than its last
  digit's rounding: tested at 1 % below, and reported;
- the symmetric slab's dispersion relation, H. Kogelnik & V. Ramaswamy,
  Appl. Opt. 13, 1857 (1974), for the slab limits of our solver;
- material indices: fused silica, I. H. Malitson, J. Opt. Soc. Am. 55, 1205
  (1965); silicon, H. H. Li, J. Phys. Chem. Ref. Data 9, 561 (1980), 293 K
  (coefficients from memory, checks.md); both solvers take the indices from
  trilane's JSON once these checks have passed;
- the supermode splitting k = pi (n_even - n_odd) / lambda and sqrt(2) k for
  three guides: coupled-mode theory, A. Yariv, IEEE J. Quantum Electron. 9,
  919 (1973).

Also ours (d = 2, 3, 4 for the derivatives): three guides at 200 nm split
by 0.99725 x sqrt(2) k (trilane 0.99712); dn_eff/dw 1.5837e-3 /nm at +-10 nm
(1.5871e-3 at +-20 nm; trilane 1.5870e-3), dn_eff/dt 3.7168e-3 /nm at
+-10 nm (trilane 3.7160e-3), group index 4.18373 (trilane 4.18370).

The whole file runs in 28-48 s on this machine's 2 cores (measured with
pytest; the sparse LU of the finest grids, 100 000 unknowns, dominates).
"""

import json
import math

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.optimize import brentq
from scipy.sparse.linalg import splu

# --------------------------------------------------------------------------
# Materials and slabs, our own evaluation
# --------------------------------------------------------------------------


def n_silicon(l):
    """Li (1980), 293 K; coefficients from memory (checks.md)."""
    e, a, b, l1 = 11.6858, 0.939816, 8.10461e-3, 1.1071
    return math.sqrt(e + a / l**2 + b * l1**2 / (l**2 - l1**2))


def n_silica(l):
    """Malitson (1965), three Sellmeier terms."""
    l2 = l * l
    terms = [(0.6961663, 0.0684043), (0.4079426, 0.1162414), (0.8974794, 9.896161)]
    return math.sqrt(1 + sum(b * l2 / (l2 - c * c) for b, c in terms))


def group(f, l, h=1e-4):
    """Material group index n - l dn/dl, central difference."""
    return f(l) - l * (f(l + h) - f(l - h)) / (2 * h)


def kogelnik(k0, d, n1, n2, tm):
    """TE0/TM0 of the symmetric slab (Kogelnik & Ramaswamy 1974)."""
    v = k0 * d * math.sqrt(n1 * n1 - n2 * n2)
    r = (n1 / n2) ** 2 if tm else 1.0
    b = brentq(lambda b: v * math.sqrt(1 - b) - 2 * math.atan(r * math.sqrt(b / (1 - b))), 1e-300, 1 - 1e-16, xtol=1e-17)
    return math.sqrt(n2 * n2 + b * (n1 * n1 - n2 * n2))


# --------------------------------------------------------------------------
# The full-vector solver, our own
# --------------------------------------------------------------------------

CLAD_X, CLAD_Y = 0.875, 0.88  # um of cladding beyond the core (fields ~ exp(-8 /um))


def stagger_1d(n, h, lo, hi):
    """Differences along one axis of n cells of step h. Nodes i h carry the
    fields tangential to a wall there (Ey, Ez along x), half nodes the normal
    one (Ex). A 'pec' wall zeroes the node fields on it; a 'pmc' wall keeps
    them and makes the half-node fields odd about it (ghost g(-h/2) = -g(h/2)).
    Returns U (half <- node, forward), V (node <- half, backward), the kept
    nodes' coordinates."""
    keep = np.ones(n + 1, bool)
    keep[0] = lo != "pec"
    keep[n] = hi != "pec"
    nodes = np.nonzero(keep)[0]
    pos = np.full(n + 1, -1)
    pos[nodes] = np.arange(nodes.size)
    m = np.arange(n)
    r, c, v = [], [], []
    for node, sign in ((m + 1, 1.0), (m, -1.0)):
        ok = pos[node] >= 0
        r.append(m[ok]), c.append(pos[node][ok]), v.append(np.full(ok.sum(), sign / h))
    U = sp.csr_matrix((np.concatenate(v), (np.concatenate(r), np.concatenate(c))), shape=(n, nodes.size))
    k = np.arange(nodes.size)
    # (g(i + 1/2) - g(i - 1/2)) / h, odd ghosts beyond a pmc wall
    right = np.where(nodes < n, nodes, n - 1)
    rsign = np.where(nodes < n, 1.0, -1.0)
    left = np.where(nodes > 0, nodes - 1, 0)
    lsign = np.where(nodes > 0, -1.0, 1.0)
    V = sp.csr_matrix(
        (np.concatenate([rsign, lsign]) / h, (np.concatenate([k, k]), np.concatenate([right, left]))),
        shape=(nodes.size, n),
    )
    return U, V, nodes * h


def cell_eps(xc, yc, hx, hy, rects, n_bg, normal):
    """eps averaged over the hx x hy cells centred on (xc, yc): harmonic along
    `normal` ('x', 'y'), arithmetic across it; None: arithmetic (Ez).
    rects: non-overlapping (x0, x1, y0, y1, n) in the background n_bg."""
    X, Y = np.meshgrid(xc, yc, indexing="ij")
    e_bg = n_bg * n_bg
    if normal is None:
        e = np.full(X.shape, e_bg)
        for x0, x1, y0, y1, n in rects:
            fx = np.clip(np.minimum(X + hx / 2, x1) - np.maximum(X - hx / 2, x0), 0, None) / hx
            fy = np.clip(np.minimum(Y + hy / 2, y1) - np.maximum(Y - hy / 2, y0), 0, None) / hy
            e += fx * fy * (n * n - e_bg)
        return e
    if normal == "x":
        A, B, ha, hb, rr = X, Y, hx, hy, rects
    else:
        A, B, ha, hb = Y, X, hy, hx
        rr = [(y0, y1, x0, x1, n) for x0, x1, y0, y1, n in rects]
    lo, hi = B - hb / 2, B + hb / 2
    cuts = sorted({r[2] for r in rr} | {r[3] for r in rr})
    edges = [lo] + [np.clip(c, lo, hi) for c in cuts] + [hi]
    out = np.zeros(X.shape)
    for a, b in zip(edges[:-1], edges[1:]):  # strips across the normal
        mid = 0.5 * (a + b)
        inv = np.full(X.shape, 1 / e_bg)
        for a0, a1, b0, b1, n in rr:
            f = np.clip(np.minimum(A + ha / 2, a1) - np.maximum(A - ha / 2, a0), 0, None) / ha
            inv += ((mid > b0) & (mid < b1)) * f * (1 / (n * n) - 1 / e_bg)
        out += (b - a) / hb / inv
    return out


def mode_index(lam, rects, n_bg, size, steps, walls, guess):
    """Effective index of the mode nearest `guess` in the quarter domain
    [0, X] x [0, Y]; walls = ((x0, xX), (y0, yY)), each 'pec' or 'pmc'.
    Returns (n_eff, share of |Ex|^2 in |Et|^2)."""
    k0 = 2 * math.pi / lam
    (X, Y), (hx, hy) = size, steps
    nx, ny = int(round(X / hx)), int(round(Y / hy))
    assert abs(nx * hx - X) < 1e-9 and abs(ny * hy - Y) < 1e-9
    (xlo, xhi), (ylo, yhi) = walls
    Ux, Vx, xn = stagger_1d(nx, hx, xlo, xhi)
    Uy, Vy, yn = stagger_1d(ny, hy, ylo, yhi)
    xh, yh = (np.arange(nx) + 0.5) * hx, (np.arange(ny) + 0.5) * hy
    Ixn, Ixh, Iyn, Iyh = (sp.identity(m, format="csr") for m in (xn.size, nx, yn.size, ny))
    # Ex at (xh, yn), Ey at (xn, yh), Ez at (xn, yn); x-major ordering
    ex = sp.diags(cell_eps(xh, yn, hx, hy, rects, n_bg, "x").ravel())
    ey = sp.diags(cell_eps(xn, yh, hx, hy, rects, n_bg, "y").ravel())
    ezi = sp.diags(1 / cell_eps(xn, yn, hx, hy, rects, n_bg, None).ravel())
    ux, vx = sp.kron(Ux, Iyn), sp.kron(Vx, Iyn)  # Ez -> Ex, Ex -> Ez
    uy, vy = sp.kron(Ixn, Uy), sp.kron(Ixn, Vy)  # Ez -> Ey, Ey -> Ez
    # i beta eps_z Ez = -(Vx eps_x Ex + Vy eps_y Ey) (Gauss), i k0 Hz = ... (Faraday):
    pxx = k0**2 * ex + sp.kron(Ixh, Vy @ Uy) + ux @ ezi @ vx @ ex
    pxy = -sp.kron(Ux, Vy) + ux @ ezi @ vy @ ey
    pyx = -sp.kron(Vx, Uy) + uy @ ezi @ vx @ ex
    pyy = k0**2 * ey + sp.kron(Vx @ Ux, Iyh) + uy @ ezi @ vy @ ey
    P = sp.bmat([[pxx, pxy], [pyx, pyy]], format="csc")
    sigma = (k0 * guess) ** 2
    lu = splu((P - sigma * sp.identity(P.shape[0], format="csc")).tocsc(), permc_spec="MMD_AT_PLUS_A")
    x = 1 + 0.1 * np.random.default_rng(1).standard_normal(P.shape[0])
    old = None
    for _ in range(100):
        y = lu.solve(x)
        b2 = sigma + (x @ x) / (x @ y)
        x = y / np.linalg.norm(y)
        if old is not None and abs(b2 - old) < 1e-14 * b2:
            break
        old = b2
    else:
        raise RuntimeError("inverse iteration did not converge")
    # the residual of the eigenpair, a check on the iteration itself
    assert np.linalg.norm(P @ x - b2 * x) < 1e-6 * b2
    nex = ex.shape[0]
    return math.sqrt(b2) / k0, float(x[:nex] @ x[:nex])


def extrapolate(ds, values):
    """Zero-step limit of values on steps h0 / d: the polynomial
    v0 + a h^2 + b h^3 (+ c h^4) through all grids; error estimate = distance
    to the h^2 Richardson extrapolation of the two finest."""
    h = 1 / np.asarray(ds, float)
    A = np.column_stack([np.ones_like(h)] + [h**p for p in range(2, len(h) + 1)])
    v = np.linalg.solve(A, np.asarray(values, float))[0]
    (h1, h2), (v1, v2) = h[-2:], values[-2:]
    r2 = v2 + (v2 - v1) * h2**2 / (h1**2 - h2**2)
    return v, abs(v - r2)


def observed_order(ds, values):
    """p of v = v0 + a h^p through the three finest grids."""
    h, v = 1 / np.asarray(ds[-3:], float), values[-3:]
    r = (v[0] - v[1]) / (v[1] - v[2])
    return brentq(lambda p: (h[0] ** p - h[1] ** p) / (h[1] ** p - h[2] ** p) - r, 0.3, 8)


# --------------------------------------------------------------------------
# Fixtures
# --------------------------------------------------------------------------


@pytest.fixture(scope="module")
def report(trilane):
    """`trilane process si220_wire --json`, the preset's full-vector law."""
    r = trilane("process", "si220_wire", "--json")
    assert r.returncode == 0, r.stderr
    return json.loads(r.stdout)


@pytest.fixture(scope="module")
def fv(report):
    """Our solver on the preset's materials, memoised. fv(kind, ...) returns
    the per-grid values and the extrapolation of one structure."""
    lam = report["wavelength_um"]
    idx = {m["role"]: m["index"] for m in report["materials"]}
    assert idx["lower cladding"] == idx["upper cladding"]  # quarter domain needs it
    nc0, ns0 = idx["core"], idx["lower cladding"]
    ng = {m["role"]: m["group_index"] for m in report["materials"]}
    cache = {}

    def solve(kind, gap=None, w=0.5, t=0.22, l=lam, ds=(2, 3, 4, 5)):
        key = (kind, gap, w, t, l, ds)
        if key in cache:
            return cache[key]
        # materials at l: linear in l from the index and group index
        # (dn/dl = (n - n_g) / l), enough for central differences of +-10 nm
        nc = nc0 + (l - lam) * (nc0 - ng["core"]) / lam
        ns = ns0 + (l - lam) * (ns0 - ng["lower cladding"]) / lam
        core = lambda x0, x1: (x0, x1, -t / 2, t / 2, nc)
        # grids: every interface on a grid line for each d
        hx0, hy0 = w / 20, t / 10
        if kind == "strip":
            rects, xmax, classes = [core(-w / 2, w / 2)], w / 2, {"": ("pec", 2.5)}
        elif kind == "pair":  # strips at g/2 .. g/2 + w and mirrored
            g = gap
            rects = [core(g / 2, g / 2 + w), core(-g / 2 - w, -g / 2)]
            xmax, classes = g / 2 + w, {"even": ("pec", 2.5), "odd": ("pmc", 2.5)}
        elif kind == "three":  # middle strip on the axis, outer ones at gap
            g = gap
            rects = [core(-w / 2, w / 2), core(w / 2 + g, 1.5 * w + g), core(-1.5 * w - g, -w / 2 - g)]
            xmax, classes = 1.5 * w + g, {"first": ("pec", 2.50), "third": ("pec", 2.40)}
        for x0, x1, y0, y1, _ in rects:  # every interface on a grid line
            for a, h0 in ((x0, hx0), (x1, hx0), (y0, hy0), (y1, hy0)):
                assert abs(a / h0 - round(a / h0)) < 1e-9, (kind, a, h0)
        out = {}
        for name, (xwall, guess) in classes.items():
            vals = []
            for d in ds:
                hx, hy = hx0 / d, hy0 / d
                X = hx * math.ceil((xmax + CLAD_X) / hx - 1e-9)
                Y = hy * math.ceil((t / 2 + CLAD_Y) / hy - 1e-9)
                n, share = mode_index(l, rects, ns, (X, Y), (hx, hy), ((xwall, "pec"), ("pmc", "pec")), guess)
                assert share > 0.9, (kind, name, d, share)  # TE-like: Ex carries the field
                vals.append(n)
                guess = n if len(vals) < 2 else n + (vals[-1] - vals[-2]) * 0.5
            out[name] = vals
        cache[key] = (out, ds)
        return cache[key]

    return solve


def limit(result, name):
    out, ds = result
    return extrapolate(ds, out[name])


def pair_k(fv, gap, lam=1.55):
    """k = pi (n_even - n_odd) / lambda (Yariv 1973) and its error estimate,
    extrapolated grid by grid."""
    out, ds = fv("pair", gap=gap / 1000)
    ks = [math.pi * (a - b) / lam for a, b in zip(out["even"], out["odd"])]
    return extrapolate(ds, ks) + (observed_order(ds, ks),)


# --------------------------------------------------------------------------
# 0. Materials: the JSON's indices, which both solvers use
# --------------------------------------------------------------------------


def test_materials_are_the_published_ones(report):
    assert report["wavelength_um"] == 1.55
    assert report["width_nm"] == 500 and report["thickness_nm"] == 220
    assert report["model"] == "full_vector"
    m = {x["role"]: x for x in report["materials"]}
    # checks.md: Malitson n(1.55) = 1.444024 (published formula), Li 3.4764
    # (coefficients from memory); our own evaluation of both formulas.
    for role in ("lower cladding", "upper cladding"):
        assert abs(m[role]["index"] - 1.444024) < 1e-6
        assert abs(m[role]["index"] - n_silica(1.55)) < 1e-9
        assert abs(m[role]["group_index"] - group(n_silica, 1.55)) < 1e-6
    assert abs(m["core"]["index"] - 3.4764) < 1e-4
    assert abs(m["core"]["index"] - n_silicon(1.55)) < 1e-9
    assert abs(m["core"]["group_index"] - group(n_silicon, 1.55)) < 1e-6


# --------------------------------------------------------------------------
# 1. Our solver against published and independent values first
# --------------------------------------------------------------------------


@pytest.mark.parametrize("tm", [False, True])
def test_own_solver_slab_limit(report, tm):
    """A film filling the domain sideways is the slab: the field is uniform
    along it (PEC walls for Ex across x; for the TM case a vertical film,
    uniform in y between PMC walls, Ex normal to the film)."""
    lam = 1.55
    idx = {m["role"]: m["index"] for m in report["materials"]}
    nc, ns = idx["core"], idx["lower cladding"]
    vals = []
    ds = (2, 3, 4, 5)
    for d in ds:
        h = 0.022 / d
        if not tm:  # Ex tangential to a horizontal film
            rects, size, steps = [(-1, 10, -0.11, 0.11, nc)], (2 * 0.025, 0.99), (0.025, h)
            walls, guess = (("pec", "pec"), ("pmc", "pec")), 2.9
        else:  # Ex normal to a vertical film
            # TM0 decays slower (5.9 /um): 1.65 um of cladding, not 0.88
            rects, size, steps = [(-0.11, 0.11, -1, 10, nc)], (1.76, 2 * 0.025), (h, 0.025)
            walls, guess = (("pec", "pec"), ("pmc", "pmc")), 2.1
        vals.append(mode_index(lam, rects, ns, size, steps, walls, guess)[0])
    n, err = extrapolate(ds, vals)
    # the 1-D interface falls on the tangential field's nodes: second order
    # (Yee 1966), and no corner to spoil it
    assert 1.9 < observed_order(ds, vals) < 2.1
    # checks.md (computed independently): 220 nm Si in SiO2, TE0 2.84819,
    # TM0 2.05364, both to the last digit
    assert abs(n - (2.05364 if tm else 2.84819)) < 1e-5
    # Kogelnik & Ramaswamy (1974), our own root: our extrapolation and its
    # error estimate hold to a few 1e-6
    exact = kogelnik(2 * math.pi / lam, 0.22, nc, ns, tm)
    assert abs(n - exact) < 3e-6 and err < 1e-5, (n, exact, err)


def test_own_solver_strip_and_coupling_against_published_values(fv):
    out, ds = fv("strip")
    n, err = extrapolate(ds, out[""])
    # convergence: second order from Yee's centred differences, the dielectric
    # corners pull the observed order away from 2 (2.2-2.3 in our study)
    assert 1.8 < observed_order(ds, out[""]) < 2.8
    assert err < 2e-5
    # checks.md: 500 x 220 strip, full-vector n_eff 2.4458 (computed
    # independently), 2.44-2.445 "from memory". Four decimals: 5e-5 rounding
    # plus our 1e-5.
    assert abs(n - 2.4458) < 1e-4, n
    # below the slab (film) index and above the effective index method,
    # which checks.md says overestimates it (EIM 2.4919, computed independently)
    assert n < 2.84819 and n < 2.4919 - 0.04
    # checks.md, coupling versus gap, full-vector (computed independently):
    # 0.0657, 0.0416, 0.0173 rad/um at 150, 200, 300 nm. Ours lie 0.35-0.5 %
    # below these (and trilane agrees with us to 0.05 %), more than their last
    # digit's rounding (0.1-0.3 %) and far more than our error estimate
    # (0.02 %); we take the notes' values to be from a less converged
    # solve and allow 1 %.
    for g, published in [(150, 0.0657), (200, 0.0416), (300, 0.0173)]:
        k, kerr, p = pair_k(fv, g)
        assert abs(k - published) < 0.01 * published, (g, k, published)
        assert kerr < 3e-4 * k, (g, k, kerr)  # our estimate: 0.02 % in the study
        # k converges with order 1.7 in our study: the gap's corners
        assert 1.4 < p < 2.4, (g, p)
    # checks.md: local decay length 101-117 nm (computed independently)
    k150, k200, k300 = (pair_k(fv, g)[0] for g in (150, 200, 300))
    for decay in (50 / math.log(k150 / k200), 100 / math.log(k200 / k300)):
        assert 101 <= decay <= 117, decay


# --------------------------------------------------------------------------
# 2. trilane against our solver
# --------------------------------------------------------------------------


def test_neff_against_own_solver(report, fv):
    n, err = limit(fv("strip"), "")
    stated = report["solution"]["neff_error"]
    # the brief's rule: within max(3e-4, our error + trilane's stated error)
    assert abs(report["neff"] - n) < max(3e-4, err + stated), (report["neff"], n, err, stated)


def test_coupling_against_own_solver(report, fv):
    rows = {row["gap_nm"]: row for row in report["coupling"]["table"]}
    ours = {}
    for g in (150, 200, 300):
        k, kerr, _ = pair_k(fv, g)
        ours[g] = k
        row = rows[float(g)]
        diff = abs(row["k_per_um"] - k)
        # Both are full-vector solutions of the same equations, extrapolated:
        # ours to 0.02 %, trilane states 0.04-0.22 % (k_error_per_um). 0.5 %
        # is twice the largest stated error; a model change (the effective
        # index method is 50 % off, checks.md) or a grid that misses its
        # asymptotic range shows at once.
        assert diff < 0.005 * k, (g, row["k_per_um"], k)
        # and the stated error bars hold: the difference is within twice
        # their sum (a factor 2 on an error estimate is common practice)
        assert diff < 2 * (row["k_error_per_um"] + kerr), (g, row["k_per_um"], k, row["k_error_per_um"], kerr)
    # the local decay length 50 / ln(k(150) / k(200)): ours to 0.1 nm of
    # 109.5 nm; 1 % leaves room for trilane's stated k errors
    ours_decay = 50 / math.log(ours[150] / ours[200])
    theirs = 50 / math.log(rows[150.0]["k_per_um"] / rows[200.0]["k_per_um"])
    assert abs(theirs - ours_decay) < 0.01 * ours_decay, (theirs, ours_decay)


def test_three_guides_against_own_solver(report, fv):
    """Three strips at 200 nm: the two highest even supermodes split by
    2 sqrt(2) k in coupled-mode theory (Yariv 1973)."""
    tg = report["three_guides"]
    assert tg["gap_nm"] == 200.0
    ds = (2, 3, 4)
    out, _ = fv("three", gap=0.2, ds=ds)
    half = [math.pi * (a - b) / 1.55 for a, b in zip(out["first"], out["third"])]
    split, err = extrapolate(ds, half)
    k = pair_k(fv, 200)[0]
    ratio = split / (math.sqrt(2) * k)
    # checks.md: sqrt(2) x the two-guide k to 0.3 % (computed independently)
    assert abs(ratio - 1) < 0.003 + 0.001, ratio
    # trilane's ratio (0.9971) against ours; splitting and k both to 0.03 %
    # between the two solvers, so 1e-3 on their ratio
    assert abs(tg["ratio_to_sqrt2_k"] - ratio) < 1e-3, (tg["ratio_to_sqrt2_k"], ratio)
    assert abs(tg["half_outer_splitting_per_um"] - split) < 0.005 * split


# --------------------------------------------------------------------------
# 3. Derivatives: width, thickness, wavelength
# --------------------------------------------------------------------------


def test_sensitivities_against_own_solver(report, fv):
    ds = (2, 3, 4)
    n_at = lambda **kw: limit(fv("strip", ds=ds, **kw), "")
    # central differences of +-10 nm, each end extrapolated on its own grid
    # (every interface on a grid line); the step's truncation error is
    # ~ f''' h^2 / 6, under 0.1 % here
    lo, hi = n_at(w=0.49), n_at(w=0.51)
    dw = (hi[0] - lo[0]) / 20
    lo, hi = n_at(t=0.21), n_at(t=0.23)
    dt = (hi[0] - lo[0]) / 20
    lo, hi = n_at(l=1.54), n_at(l=1.56)
    n0 = limit(fv("strip"), "")[0]
    ng = n0 - 1.55 * (hi[0] - lo[0]) / 0.02
    # checks.md (computed independently): dn_eff/dw 1.58e-3 /nm, dn_eff/dt
    # 3.7e-3 /nm, group index 4.18 (about 4.2 from memory)
    assert abs(dw - 1.58e-3) < 0.01e-3, dw
    assert abs(dt - 3.7e-3) < 0.05e-3, dt
    assert abs(ng - 4.18) < 0.01, ng
    # trilane: its derivatives come from a Taylor polynomial through solves
    # one step either side, reach = two steps (docs/process.md: +-40 nm wide,
    # +-18 nm thick, so 20 and 9 nm), ours from +-10 nm: in width that alone
    # makes 0.2 % (ours at +-20 nm: 1.5871e-3, in development); both solvers'
    # errors (1e-5 in n_eff over 0.03 in the difference) are smaller. 1 %.
    assert abs(report["dneff_dw_per_nm"] - dw) < 0.01 * dw, (report["dneff_dw_per_nm"], dw)
    assert abs(report["dneff_dt_per_nm"] - dt) < 0.01 * dt, (report["dneff_dt_per_nm"], dt)
    # n_g - n_eff = -l dn/dl is the part both solve; 1 % of it
    assert abs(report["group_index"] - ng) < 0.01 * (ng - n0), (report["group_index"], ng)
