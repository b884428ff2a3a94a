"""`trilane build`'s netlist.json checked from the netlist alone.

The chips are built into a pytest temporary folder; every check then reads
only what `build` wrote (netlist.json, report.json, floorplan.svg) and the
rules that docs/netlist.md states. Nothing is taken from trilane's code.

- Re-integration (the main check): every cell is integrated again from its
  geometry in the netlist and the process's coupling table in the
  netlist, by scipy.integrate.solve_ivp (DOP853: Hairer, Norsett & Wanner,
  Solving Ordinary Differential Equations I, 2nd ed., Springer 1993),
  an integrator independent of trilane's Magnus schemes. The equations are
  coupled-mode theory, A. Yariv, IEEE J. Quantum Electron. 9, 919 (1973):
  d a/dz = -i H(z) a. The chip is then rebuilt as the product of all its
  components in x order with the re-integrated blocks in place of the
  cells' `rail_block`, and compared with `target_unitary` by the mode
  fidelity of docs/physics.md section 4 (physics convention of the
  project: a_out = U a_in, column j is what mode j's input becomes).
- The coupling law is rebuilt here as scipy.interpolate.CubicSpline with
  natural ends through (gap_nm, ln k) (the natural cubic spline: C. de
  Boor, A Practical Guide to Splines, Springer 1978, chapter IV), continued
  by straight lines in ln k with the spline's end slopes, as the netlist's
  `process.coupling.law` says.
- Equal path loss, the SVG's cells, and the connections (one chain per
  mode, from its input port at x = 0 to its output port at x = length_um)
  are checked from the netlist's own fields.
- The netlists are validated against docs/netlist.schema.json (JSON Schema
  draft 2020-12) when the jsonschema package is there.

The whole file runs in about 15 s on two cores, the builds included (cells of one geometry are
integrated once).
"""

import bisect
import json
import math
import pathlib
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.interpolate import CubicSpline

ROOT = pathlib.Path(__file__).resolve().parents[2]
SCHEMA = ROOT / "docs" / "netlist.schema.json"

# solve_ivp tolerances: far below the 1e-6 the checks ask for.
RTOL, ATOL = 1e-12, 1e-13

# name -> (circuit, extra build options)
BUILDS = {
    "bell_pair": ("circuits/bell_pair.trl", []),
    "ghz3": ("circuits/ghz3.trl", []),
    "bell_pair_flat": ("circuits/bell_pair.trl", ["--strategy", "flat"]),
    "bell_pair_local": ("circuits/bell_pair.trl", ["--strategy", "local"]),
    "bell_pair_coupler": ("circuits/bell_pair.trl", ["--cell", "coupler"]),
    "bell_pair_mzi": ("circuits/bell_pair.trl", ["--cell", "mzi"]),
    # Cells each of their own length, passive phase shifters.
    "bell_pair_shortest_passive": (
        "circuits/bell_pair.trl",
        ["--strategy", "flat", "--cell-length", "shortest", "--phase", "passive"],
    ),
}
CELL_KINDS = ("geometric_cell", "coupler", "mzi")
OUTPUTS = ("netlist.json", "floorplan.svg", "report.txt", "report.json")


# --------------------------------------------------------------------------
# Building
# --------------------------------------------------------------------------


@pytest.fixture(scope="session")
def chip(trilane, tmp_path_factory):
    """chip(name) -> {"dir", "netlist", "report"}, built once per session."""
    cache = {}

    def get(name):
        if name not in cache:
            circuit, extra = BUILDS[name]
            out = tmp_path_factory.mktemp(name)
            r = trilane("build", circuit, "-o", str(out), *extra, cwd=ROOT)
            # Exit 1: a requirement of the circuit fails on the nominal chip,
            # which still writes every output (cli help of `build`). Exit 2
            # (usage) or 70 (internal error) is a failure.
            assert r.returncode in (0, 1), f"build {name}: exit {r.returncode}\n{r.stderr}"
            for f in OUTPUTS:
                assert (out / f).is_file(), f"build {name} did not write {f}\n{r.stderr}"
            cache[name] = {
                "dir": out,
                "netlist": json.loads((out / "netlist.json").read_text()),
                "report": json.loads((out / "report.json").read_text()),
            }
        return cache[name]

    return get


# --------------------------------------------------------------------------
# The netlist's rules (docs/netlist.md)
# --------------------------------------------------------------------------


def cmat(m):
    """A netlist matrix {"re", "im"} (row-major) as a complex array."""
    return np.asarray(m["re"], float) + 1j * np.asarray(m["im"], float)


def component_matrix(c, block=None):
    """The component's matrix on its modes (docs/netlist.md, "Rebuilding the
    transfer matrix", section 6); `block` replaces a cell's rail_block. None for ports
    and terminators (the identity)."""
    kind, p = c["kind"], c["params"]
    if kind in ("port", "terminator"):
        return None
    a = 10.0 ** (-p["loss_db"] / 20.0)
    if kind in CELL_KINDS:
        return a * (cmat(p["rail_block"]) if block is None else block)
    if kind == "crossing":
        return a * np.exp(1j * p["phase_rad"]) * np.array([[0, 1], [1, 0]], complex)
    # waveguide, bend, phase_shifter: one mode
    return np.array([[a * np.exp(1j * p["phase_rad"])]])


def chip_matrix(net, blocks=None):
    """The product of all components in the order listed (x order):
    T = M_K ... M_2 M_1, each M_k the component's matrix on its modes."""
    blocks = blocks or {}
    n = len(net["modes"])
    t = np.eye(n, dtype=complex)
    for i, c in enumerate(net["components"]):
        m = component_matrix(c, blocks.get(i))
        if m is None:
            continue
        idx = c["modes"]
        t[idx, :] = m @ t[idx, :]
    return t


def mode_fidelity(target, chip_t, detect):
    """Loss-normalised mode fidelity of docs/physics.md section 4 (physics
    convention of the project): F_U = |Tr(U_t^dag T)|^2 / (N Tr(T^dag T));
    when the chip ends in photon counting (fidelity_kind "detect") the
    output phases are free: F = (sum_i |sum_j conj(U_t,ij) T_ij|)^2 /
    (N Tr(T^dag T))."""
    n = target.shape[0]
    norm = float(np.sum(np.abs(chip_t) ** 2))
    if detect:
        s = float(np.sum(np.abs(np.sum(target.conj() * chip_t, axis=1))))
    else:
        s = abs(complex(np.sum(target.conj() * chip_t)))
    return s * s / (n * norm)


# --------------------------------------------------------------------------
# The coupling law and the cells' equations
# --------------------------------------------------------------------------


class Law:
    """k(g) of netlist process.coupling: ln k a natural cubic spline in the
    gap through `table` (de Boor 1978, ch. IV, via scipy's CubicSpline),
    continued beyond the table by straight lines in ln k with the spline's
    end slopes (the natural spline's curvature is zero there)."""

    def __init__(self, table):
        g = np.array([t["gap_nm"] for t in table], float)
        y = np.log([t["k_per_um"] for t in table])
        self.spline = CubicSpline(g, y, bc_type="natural")
        self.knots = g
        self._x = g.tolist()
        self._c = self.spline.c.T.tolist()  # per interval: cubic coefficients
        slope = self.spline.derivative()
        self._ends = (
            (g[0], float(y[0]), float(slope(g[0]))),
            (g[-1], float(y[-1]), float(slope(g[-1]))),
        )

    def ln_k(self, gap_nm):
        (g0, y0, s0), (g1, y1, s1) = self._ends
        if gap_nm <= g0:
            return y0 + s0 * (gap_nm - g0)
        if gap_nm >= g1:
            return y1 + s1 * (gap_nm - g1)
        i = bisect.bisect_right(self._x, gap_nm) - 1
        d = gap_nm - self._x[i]
        c3, c2, c1, c0 = self._c[i]
        return ((c3 * d + c2) * d + c1) * d + c0

    def k(self, gap_nm):
        return math.exp(self.ln_k(gap_nm))


def integrate_piecewise(rhs, dim, breaks):
    """The propagator of d A/dz = rhs(z, A) over consecutive segments (the
    breaks are where a derivative of H jumps: no step straddles one)."""
    u = np.eye(dim, dtype=complex)
    for a, b in zip(breaks[:-1], breaks[1:]):
        if b - a < 1e-12:
            continue
        sol = solve_ivp(
            lambda z, y: rhs(z, y.reshape(dim, dim)).ravel(),
            (a, b),
            u.ravel(),
            method="DOP853",
            rtol=RTOL,
            atol=ATOL,
        )
        assert sol.success, sol.message
        u = sol.y[:, -1].reshape(dim, dim)
    return u


def geometric_propagator(p, law):
    """The 3 x 3 propagator (upper rail, auxiliary, lower rail) of a
    geometric cell from its netlist params: coupled-mode equations (Yariv,
    IEEE JQE 9, 919, 1973) d A/dz = -i H(z) A, z in [0, L] um,
    H = [[d_r, k_u, 0], [k_u, 0, k_l], [0, k_l, d_r]], k_j = k(g_j(z)),
    g_j(z) = gap_j + b (z - L/2)^2 (nm, b in nm/um^2), and both rails
    detuned by their path, d_r = beta (sqrt(1 + s^2) - 1), s = dg/dz =
    2 b (z - L/2) * 1e-3 (a guide of slope s covers sqrt(1 + s^2) of path
    per unit z: plain geometry)."""
    length, b, beta = p["length_um"], p["bend_nm_per_um2"], p["beta_per_um"]
    gu0, gl0 = p["gap_upper_nm"], p["gap_lower_nm"]
    half = length / 2.0

    def rhs(z, a):
        x = z - half
        rise = b * x * x
        ku, kl = law.k(gu0 + rise), law.k(gl0 + rise)
        s = 2.0 * b * x * 1e-3
        dr = beta * (math.sqrt(1.0 + s * s) - 1.0)
        h = np.array([[dr, ku, 0.0], [ku, 0.0, kl], [0.0, kl, dr]])
        return -1j * (h @ a)

    # Where a gap crosses a knot of the law, the spline's third derivative
    # jumps: integrate between those points.
    breaks = {0.0, length}
    for g0 in (gu0, gl0):
        for knot in law.knots:
            if knot > g0 and b > 0:
                x = math.sqrt((knot - g0) / b)
                breaks.update(z for z in (half - x, half + x) if 0.0 < z < length)
    return integrate_piecewise(rhs, 3, sorted(breaks))


def coupler_propagator(p, law):
    """The 2 x 2 transfer of a directional coupler from its netlist params:
    H = [[0, k], [k, 0]] (Yariv 1973), k = k(g(z)) along bend, straight,
    bend: z in [0, straight + 2 reach]; in the bends g = gap + x^2 / R * 1e3
    (nm; x um into the bend region from the straight, R um: both guides
    bending, small angles), in the straight g = gap."""
    gap, st = p["gap_nm"], p["straight_um"]
    r, reach = p["bend_radius_um"], p["bend_reach_um"]
    total = st + 2.0 * reach

    def rhs(z, a):
        if z < reach:
            x = reach - z
        elif z > reach + st:
            x = z - reach - st
        else:
            x = 0.0
        k = law.k(gap + x * x / r * 1e3)
        return -1j * np.array([[k * a[1, 0], k * a[1, 1]], [k * a[0, 0], k * a[0, 1]]])

    breaks = {0.0, reach, reach + st, total}
    for knot in law.knots:
        if knot > gap:
            x = math.sqrt((knot - gap) * r * 1e-3)
            breaks.update(z for z in (reach - x, reach + st + x) if 0.0 < z < total)
    return integrate_piecewise(rhs, 2, sorted(breaks))


_PROPAGATORS = {}


def _cached(key, compute):
    if key not in _PROPAGATORS:
        _PROPAGATORS[key] = compute()
    return _PROPAGATORS[key]


def coupler_block(p, table):
    """A coupler's re-integrated 2 x 2 transfer, once per geometry."""
    geo = tuple(p[g] for g in ("gap_nm", "straight_um", "bend_radius_um", "bend_reach_um"))
    return _cached(("coupler", json.dumps(table), geo), lambda: coupler_propagator(p, Law(table)))


def reintegrated(c, net):
    """(rail block, full propagator) of a cell component, re-integrated from
    the netlist alone; cells of one geometry are integrated once a session."""
    kind, p = c["kind"], c["params"]
    table = net["process"]["coupling"]["table"]
    if kind == "geometric_cell":
        geo = tuple(p[g] for g in ("gap_upper_nm", "gap_lower_nm", "bend_nm_per_um2", "length_um", "beta_per_um"))
        u = _cached(("geometric", json.dumps(table), geo), lambda: geometric_propagator(p, Law(table)))
        return u[np.ix_([0, 2], [0, 2])], u
    if kind == "coupler":
        u = coupler_block(p, table)
        return u, u
    # mzi: U = C diag(e^{i phi}, 1) C, the Mach-Zehnder interferometer of
    # two equal couplers (Born & Wolf, Principles of Optics, 7th ed., 1999,
    # section 7.5).
    cpl = coupler_block(p["coupler"], table)
    u = cpl @ np.diag([np.exp(1j * p["phi"]), 1.0]) @ cpl
    return u, u


def cells(net):
    return [(i, c) for i, c in enumerate(net["components"]) if c["kind"] in CELL_KINDS]


# --------------------------------------------------------------------------
# a. Re-integration from the netlist alone
# --------------------------------------------------------------------------


def test_the_law_interpolates_its_table_and_continues_straight(chip):
    # The rebuilt law (de Boor 1978 natural spline, straight continuation)
    # goes through the table and is C1 where the continuations start.
    net = chip("bell_pair")["netlist"]
    table = net["process"]["coupling"]["table"]
    law = Law(table)
    for t in table:
        assert law.k(t["gap_nm"]) == pytest.approx(t["k_per_um"], rel=1e-13)
    for g in (law.knots[0], law.knots[-1]):
        eps = 1e-6
        left = (law.ln_k(g) - law.ln_k(g - eps)) / eps
        right = (law.ln_k(g + eps) - law.ln_k(g)) / eps
        assert left == pytest.approx(right, rel=1e-4)


@pytest.mark.parametrize("name", list(BUILDS))
def test_reintegrated_cells_match_the_rail_blocks(chip, name):
    # scipy's solve_ivp (DOP853) on the coupled-mode equations (Yariv 1973)
    # from the netlist's geometry and law, against each cell's rail_block.
    net = chip(name)["netlist"]
    assert cells(net), "the chip has no cells"
    worst = 0.0
    for _, c in cells(net):
        block, u = reintegrated(c, net)
        # Sanity of our own integration: a lossless propagator is unitary.
        assert np.max(np.abs(u.conj().T @ u - np.eye(u.shape[0]))) < 1e-10
        dev = float(np.max(np.abs(block - cmat(c["params"]["rail_block"]))))
        worst = max(worst, dev)
        assert dev < 1e-6, f"{c['id']}: rail_block off by {dev:.3e}"
        if c["kind"] == "geometric_cell":
            # The netlist's leakage is the largest power a rail input leaves
            # in the auxiliary guide; split_error the largest difference of
            # |R| from |S(theta)|, S = [[cos, -sin], [-sin, -cos]] (the
            # holonomic gate: Sjoqvist et al., New J. Phys. 14, 103035, 2012).
            p = c["params"]
            leak = max(abs(u[1, 0]) ** 2, abs(u[1, 2]) ** 2)
            assert leak == pytest.approx(p["leakage"], abs=1e-9)
            th = p["theta"]
            s = np.array([[math.cos(th), math.sin(th)], [math.sin(th), math.cos(th)]])
            split = float(np.max(np.abs(np.abs(block) - s)))
            assert split == pytest.approx(p["split_error"], abs=1e-8)
        if c["kind"] == "mzi":
            # The MZI's own coupler block, re-integrated alone.
            cpl = coupler_block(c["params"]["coupler"], net["process"]["coupling"]["table"])
            assert np.max(np.abs(cpl - cmat(c["params"]["coupler"]["rail_block"]))) < 1e-6
    print(f"{name}: largest rail-block deviation {worst:.3e}")


@pytest.mark.parametrize("name", list(BUILDS))
def test_netlist_transfer_is_the_product_of_its_components(chip, name):
    # The rule of docs/netlist.md: the product of all components in x order.
    net = chip(name)["netlist"]
    xs = [c["x_um"] for c in net["components"]]
    assert all(a <= b for a, b in zip(xs, xs[1:])), "components are not listed in x order"
    t = chip_matrix(net)
    assert np.max(np.abs(t - cmat(net["transfer_matrix"]))) < 1e-12


@pytest.mark.parametrize("name", list(BUILDS))
def test_rebuilt_chip_does_the_target(chip, name):
    # The chip rebuilt with re-integrated cells (solve_ivp, Yariv 1973)
    # against target_unitary by the mode fidelity of docs/physics.md
    # section 4, output phases free when the chip ends in detect.
    built = chip(name)
    net, rep = built["netlist"], built["report"]
    kind = rep["fidelity_kind"]
    assert kind in ("detect", "process")
    detect = kind == "detect"
    blocks = {i: reintegrated(c, net)[0] for i, c in cells(net)}
    t = chip_matrix(net, blocks)
    target = cmat(net["target_unitary"])
    n = len(net["modes"])
    assert target.shape == (n, n) and t.shape == (n, n)
    # The target is unitary (docs/physics.md section 1).
    assert np.max(np.abs(target.conj().T @ target - np.eye(n))) < 1e-12
    f = mode_fidelity(target, t, detect)
    print(f"{name}: 1 - F = {1 - f:.3e} ({kind})")
    assert 1 - f < 1e-6, f"{name}: 1 - F = {1 - f:.3e}"
    assert np.max(np.abs(t - cmat(net["transfer_matrix"]))) < 1e-6
    # report.json's mode fidelity is that of the netlist's own transfer.
    f_net = mode_fidelity(target, cmat(net["transfer_matrix"]), detect)
    assert f_net == pytest.approx(rep["mode_fidelity"], abs=1e-12)


@pytest.mark.parametrize("name", list(BUILDS))
def test_cell_params_are_consistent(chip, name):
    # Plain geometry and unit conversions among a cell's own params.
    net = chip(name)["netlist"]
    for _, c in cells(net):
        p = c["params"]
        assert c["length_um"] == pytest.approx(p["length_um"], rel=1e-12)
        r = cmat(p["rail_block"])
        th = p["theta"]
        assert 0 < th <= math.pi / 2 + 1e-12
        if c["kind"] == "geometric_cell":
            b, half = p["bend_nm_per_um2"], p["length_um"] / 2
            assert p["bend_per_m"] == pytest.approx(1e3 * b, rel=1e-12)  # 1 nm/um^2 = 1000 /m
            assert p["end_gap_upper_nm"] == pytest.approx(p["gap_upper_nm"] + b * half**2, rel=1e-12)
            assert p["end_gap_lower_nm"] == pytest.approx(p["gap_lower_nm"] + b * half**2, rel=1e-12)
            # beta = 2 pi n_eff / lambda
            pr = net["process"]
            assert p["beta_per_um"] == pytest.approx(2 * math.pi * pr["neff"] / pr["wavelength_um"], rel=1e-12)
            assert abs(abs(r[0, 0]) - math.cos(th)) < 1e-5
        elif c["kind"] == "coupler":
            assert p["length_um"] == pytest.approx(p["straight_um"] + 2 * p["bend_reach_um"], rel=1e-12)
            assert abs(abs(r[1, 0]) ** 2 - math.sin(th) ** 2) < 1e-8
        else:
            cp = p["coupler"]
            assert p["length_um"] == pytest.approx(2 * cp["length_um"] + p["arm_um"], rel=1e-12)
            assert abs(abs(r[1, 0]) ** 2 - math.sin(th) ** 2) < 1e-8


# --------------------------------------------------------------------------
# b. Equal path loss
# --------------------------------------------------------------------------


def rail_loss_db(c, j):
    """The loss (dB) the input on the component's j-th mode sees (cells: the
    power that leaves the rails too, from the column of the rail block)."""
    p = c["params"]
    if c["kind"] in CELL_KINDS:
        kept = float(np.sum(np.abs(cmat(p["rail_block"])[:, j]) ** 2))
        return p["loss_db"] - 10.0 * math.log10(kept)
    return p["loss_db"]


@pytest.mark.parametrize("name", list(BUILDS))
def test_every_mode_loses_the_same(chip, name):
    # docs/netlist.md section 8: the balancing sections equalise the paths;
    # the loss a rail input sees is summed along its chain.
    built = chip(name)
    net, rep = built["netlist"], built["report"]
    n = len(net["modes"])
    alpha = net["process"]["propagation_db_per_cm"] * 1e-4  # dB/um
    loss, unbalanced = np.zeros(n), np.zeros(n)
    for c in net["components"]:
        if c["kind"] in ("port", "terminator"):
            continue
        for j, m in enumerate(c["modes"]):
            own = rail_loss_db(c, j)
            loss[m] += own
            # Without balancing: a balancing section is plain straight rail.
            balance = c["kind"] == "waveguide" and c["params"]["role"] == "balance"
            unbalanced[m] += alpha * c["length_um"] if balance else own
    assert np.max(np.abs(loss - np.array(rep["path_loss_db"]))) < 1e-9
    spread = float(loss.max() - loss.min())
    print(f"{name}: path loss {loss.mean():.4f} dB, spread {spread:.3e} dB")
    assert spread < 1e-3, f"{name}: path loss spreads by {spread:.3e} dB: {loss}"
    assert rep["path_loss_spread_db"] == pytest.approx(spread, abs=1e-12)
    assert rep["path_loss_spread_db"] < 1e-3
    assert rep["path_loss_spread_without_balancing_db"] > 0
    assert rep["path_loss_spread_without_balancing_db"] == pytest.approx(
        float(unbalanced.max() - unbalanced.min()), abs=1e-9
    )


# --------------------------------------------------------------------------
# c. The SVG
# --------------------------------------------------------------------------


@pytest.mark.parametrize("name", ["bell_pair", "ghz3", "bell_pair_coupler", "bell_pair_mzi"])
def test_floorplan_svg_draws_every_cell(chip, name):
    # XML well-formedness (xml.etree.ElementTree), an <svg> root, and one
    # element of class "cell" per cell component of the netlist.
    built = chip(name)
    root = ET.parse(built["dir"] / "floorplan.svg").getroot()
    assert root.tag in ("svg", "{http://www.w3.org/2000/svg}svg")
    drawn = [e for e in root.iter() if "cell" in (e.get("class") or "").split()]
    assert len(drawn) == len(cells(built["netlist"])), (
        f"{len(drawn)} elements of class cell for {len(cells(built['netlist']))} cells"
    )


# --------------------------------------------------------------------------
# d. Connections
# --------------------------------------------------------------------------


@pytest.mark.parametrize("name", list(BUILDS))
def test_component_ids_are_unique(chip, name):
    # Connections name components by id: an id must name one component.
    ids = [c["id"] for c in chip(name)["netlist"]["components"]]
    dup = sorted({i for i in ids if ids.count(i) > 1})
    assert not dup, f"{len(dup)} ids name several components: {dup[:6]}"


def check_chains(net):
    """Each mode is one chain of connections from its input port (x = 0) to
    its output port (x = length_um) through every component on the mode,
    x increasing along it (docs/netlist.md section 5)."""
    comps = {c["id"]: c for c in net["components"]}
    unique, listed = len(comps), len(net["components"])
    assert unique == listed, "component ids are not unique"
    length = net["length_um"]
    for mode in net["modes"]:
        m = mode["index"]
        ins = [c for c in net["components"] if c["kind"] == "port" and c["params"]["side"] == "input" and c["modes"] == [m]]
        outs = [c for c in net["components"] if c["kind"] == "port" and c["params"]["side"] == "output" and c["modes"] == [m]]
        assert len(ins) == 1 and len(outs) == 1, f"mode {m}: ports {ins} {outs}"
        # Ports at the chip's edges.
        assert ins[0]["x_um"] == 0.0 and ins[0]["ports"] == [f"out.{m}"]
        assert outs[0]["x_um"] == pytest.approx(length, abs=1e-9) and outs[0]["ports"] == [f"in.{m}"]
        assert ins[0]["params"]["mode_name"] == mode["name"] == outs[0]["params"]["mode_name"]
        assert mode["y_um"] == ins[0]["y_um"] == outs[0]["y_um"]
        links = [e for e in net["connections"] if e["mode"] == m]
        nxt = {}
        for e in links:
            a, b = e["from"]["component"], e["to"]["component"]
            assert e["from"]["port"] == f"out.{m}" and e["from"]["port"] in comps[a]["ports"]
            assert e["to"]["port"] == f"in.{m}" and e["to"]["port"] in comps[b]["ports"]
            assert a not in nxt, f"mode {m}: {a} feeds two components"
            nxt[a] = b
        chain = [ins[0]["id"]]
        while chain[-1] in nxt:
            assert nxt[chain[-1]] not in chain, f"mode {m}: a cycle at {nxt[chain[-1]]}"
            chain.append(nxt[chain[-1]])
        assert chain[-1] == outs[0]["id"], f"mode {m}: the chain ends at {chain[-1]}"
        assert len(chain) == len(links) + 1, f"mode {m}: connections off the chain"
        carriers = {c["id"] for c in net["components"] if m in c["modes"] and c["kind"] != "terminator"}
        assert set(chain) == carriers, f"mode {m}: components off the chain: {sorted(carriers - set(chain))}"
        # x increases along the chain, and the components of positive length
        # follow each other without a gap or an overlap.
        xs = [comps[i]["x_um"] for i in chain]
        assert all(a <= b for a, b in zip(xs, xs[1:])), f"mode {m}: x decreases along the chain"
        solid = [comps[i] for i in chain if comps[i]["length_um"] > 0]
        for a, b in zip(solid, solid[1:]):
            assert b["x_um"] == pytest.approx(a["x_um"] + a["length_um"], abs=1e-6), f"{a['id']} -> {b['id']}"
    # Nothing connects modes that are not named.
    assert {e["mode"] for e in net["connections"]} <= {mode["index"] for mode in net["modes"]}


@pytest.mark.parametrize("name", list(BUILDS))
def test_each_mode_is_one_chain_from_port_to_port(chip, name):
    check_chains(chip(name)["netlist"])


# --------------------------------------------------------------------------
# The JSON Schema (docs/netlist.schema.json)
# --------------------------------------------------------------------------


@pytest.mark.parametrize("name", list(BUILDS))
def test_netlist_matches_its_schema(chip, name):
    jsonschema = pytest.importorskip("jsonschema")
    schema = json.loads(SCHEMA.read_text())
    jsonschema.Draft202012Validator.check_schema(schema)
    net = chip(name)["netlist"]
    validator = jsonschema.Draft202012Validator(schema)
    errors = sorted(validator.iter_errors(net), key=lambda e: list(e.absolute_path))
    assert not errors, "\n".join(f"{list(e.absolute_path)}: {e.message}" for e in errors[:10])
    assert net["format"] == "trilane-netlist" and net["version"] == 1


@pytest.mark.parametrize("name", ["bell_pair", "ghz3"])
def test_path_phases_and_heater_power_follow_the_cells_convention(chip, name):
    # A bent rail's phase, derived here in the cells' own convention: the
    # cells integrate d a/dz = -i H a with the path detuning
    # beta (sqrt(1 + y'^2) - 1) of a rail at slope y' (docs/netlist.md), so
    # along an S-bend (two circular arcs of radius R, each turning by alpha)
    # the amplitude obeys the same equation with that detuning. Integrated
    # by solve_ivp, it must give e^{i phase_rad}: a sign flip between the
    # bends and the cells would leave the nominal chip exact but build the
    # wrong chip (found in review). And a heater set to transfer phase phi
    # delays by (-phi) mod 2 pi: power = p_pi * delay / pi.
    built = chip(name)
    net = built["netlist"]
    beta = 2 * math.pi * net["process"]["neff"] / net["process"]["wavelength_um"]
    bends = [c for c in net["components"] if c["kind"] == "bend"]
    assert bends
    for c in bends[:6]:
        p = c["params"]
        r, alpha = p["radius_um"], p["angle_rad"]
        half = r * math.sin(alpha)

        def slope(x):
            # first arc turns in, the second turns back (mirror image)
            u = x if x < half else 2 * half - x
            return u / math.sqrt(r * r - u * u)

        def rhs(x, a):
            s = slope(x)
            return -1j * beta * (math.sqrt(1 + s * s) - 1) * a

        sol = solve_ivp(rhs, (0, 2 * half), [1 + 0j], method="DOP853", rtol=1e-12, atol=1e-14)
        got = sol.y[0, -1]
        want = np.exp(1j * p["phase_rad"])
        assert abs(got - want) < 1e-8, (c["id"], got, want)
    p_pi = net["process"]["p_pi_mw"]
    total = 0.0
    for c in net["components"]:
        if c["kind"] == "phase_shifter" and c["params"]["tuning"] == "thermal":
            delay = (-c["params"]["phase_rad"]) % (2 * math.pi)
            assert abs(c["params"]["power_mw"] - p_pi * delay / math.pi) < 1e-9
            total += c["params"]["power_mw"]
    for c in net["components"]:
        if c["kind"] == "mzi":
            total += c["params"]["power_mw"]
    assert abs(total - built["report"]["heater_power_mw"]) < 1e-6
