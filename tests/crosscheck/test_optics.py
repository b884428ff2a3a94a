"""`trilane simulate` checked against linear optics written here with numpy.

Every reference number in this file is computed by the test itself, never
read back from trilane:

- the one-qubit gate matrices are our own table, after Nielsen & Chuang,
  *Quantum Computation and Quantum Information* (Cambridge University Press,
  2000), section 4.2;
- the permanent is Ryser's formula (H. J. Ryser, *Combinatorial
  Mathematics*, Carus Monographs 14, 1963), written below and checked against
  the brute-force sum over permutations and two textbook values;
- a multi-photon amplitude is <T|U|S> = perm(U[T, S]) / sqrt(prod t! prod s!),
  the formula of S. Scheel, quant-ph/0406127 (2004), and S. Aaronson &
  A. Arkhipov, Theory of Computing 9, 143 (2013), with a_out = U a_in (rows
  are output modes);
- Haar-random unitaries are drawn by the QR method with the phase fix of
  F. Mezzadri, Notices of the AMS 54, 592 (2007);
- published values: Hong, Ou & Mandel, PRL 59, 2044 (1987) for two photons
  on a splitter; Ralph, Langford, Bell & White, PRA 65, 062324 (2002) for
  the post-selected CZ (success 1/9); Knill, PRA 66, 052306 (2002) for the
  heralded CZ (success 2/27).

The circuits are our own small scenarios. All of them run in well under a
second each.
"""

import itertools
import json
import math

import numpy as np
import pytest

TOL = 1e-12

# --------------------------------------------------------------------------
# References written here
# --------------------------------------------------------------------------

# One-qubit gates, Nielsen & Chuang (2000), section 4.2. RX, RY, RZ are
# exp(-i t sigma/2); P(t) = diag(1, e^{it}).
_S2 = 1 / math.sqrt(2)
FIXED_GATES = {
    "I": np.eye(2, dtype=complex),
    "X": np.array([[0, 1], [1, 0]], dtype=complex),
    "Y": np.array([[0, -1j], [1j, 0]], dtype=complex),
    "Z": np.array([[1, 0], [0, -1]], dtype=complex),
    "H": np.array([[_S2, _S2], [_S2, -_S2]], dtype=complex),
    "S": np.array([[1, 0], [0, 1j]], dtype=complex),
    "T": np.array([[1, 0], [0, np.exp(1j * math.pi / 4)]], dtype=complex),
    "SDG": np.array([[1, 0], [0, -1j]], dtype=complex),
    "TDG": np.array([[1, 0], [0, np.exp(-1j * math.pi / 4)]], dtype=complex),
}


def angle_gate(name, t):
    c, s = math.cos(t / 2), math.sin(t / 2)
    if name == "RX":
        return np.array([[c, -1j * s], [-1j * s, c]])
    if name == "RY":
        return np.array([[c, -s], [s, c]], dtype=complex)
    if name == "RZ":
        return np.diag([np.exp(-1j * t / 2), np.exp(1j * t / 2)])
    if name == "P":
        return np.diag([1, np.exp(1j * t)])
    raise KeyError(name)


# Two-qubit gates in the basis |00>, |01>, |10>, |11>, first operand most
# significant (Nielsen & Chuang 2000, section 4.3).
CZ = np.diag([1, 1, 1, -1]).astype(complex)
CNOT = np.array([[1, 0, 0, 0], [0, 1, 0, 0], [0, 0, 0, 1], [0, 0, 1, 0]], dtype=complex)


def permanent(a):
    """Ryser's formula: perm A = (-1)^n sum_S (-1)^|S| prod_i sum_{j in S} a_ij."""
    a = np.asarray(a, dtype=complex)
    n = a.shape[0]
    if n == 0:
        return 1.0 + 0j
    total = 0j
    for k in range(1, n + 1):
        for cols in itertools.combinations(range(n), k):
            total += (-1) ** k * np.prod(a[:, cols].sum(axis=1))
    return (-1) ** n * total


def permanent_brute(a):
    """The definition: sum over permutations of prod_i a_{i, sigma(i)}."""
    n = len(a)
    return sum(np.prod([a[i][p[i]] for i in range(n)]) for p in itertools.permutations(range(n)))


def photon_list(occ):
    """Mode index of each photon, with repeats: (2, 0, 1) -> [0, 0, 2]."""
    return [m for m, k in enumerate(occ) for _ in range(k)]


def amplitude(u, s, t):
    """<T|U|S> for Fock states S (input) and T (output), Scheel 2004 /
    Aaronson & Arkhipov 2013: rows by the output photons, columns by the
    input photons."""
    if sum(s) != sum(t):
        return 0j
    sub = u[np.ix_(photon_list(t), photon_list(s))]
    norm = math.prod(math.factorial(k) for k in s) * math.prod(math.factorial(k) for k in t)
    return permanent(sub) / math.sqrt(norm)


def patterns(n_photons, n_modes):
    """Every occupation of n_modes by n_photons photons."""
    for combo in itertools.combinations_with_replacement(range(n_modes), n_photons):
        yield tuple(combo.count(m) for m in range(n_modes))


def haar_unitary(n, seed):
    """Haar measure on U(n): QR of a complex Ginibre matrix, columns fixed by
    the phases of R's diagonal (Mezzadri 2007)."""
    rng = np.random.default_rng(seed)
    z = (rng.normal(size=(n, n)) + 1j * rng.normal(size=(n, n))) / math.sqrt(2)
    q, r = np.linalg.qr(z)
    d = np.diag(r)
    return q * (d / np.abs(d))


def embed(n_modes, modes, block):
    """The identity on n_modes with `block` on the listed modes (in order)."""
    u = np.eye(n_modes, dtype=complex)
    u[np.ix_(modes, modes)] = block
    return u


def logical_map_from_modes(u, rails, anc_in=(), anc_out=()):
    """V[y, x] = <y, anc_out| U |x, anc_in> over the qubits' logical basis.

    `rails[k]` = (mode of q_k.0, mode of q_k.1); the first qubit is the most
    significant bit. `anc_in` / `anc_out` are (mode, photons) pairs for the
    ancilla modes: vacuum modes are conditioned on staying empty, herald
    modes on their count. Unnormalised, as a post-selected or heralded map.
    """
    n_modes, n = u.shape[0], len(rails)
    d = 2**n

    def occ(bits, anc):
        o = [0] * n_modes
        for k, b in enumerate(bits):
            o[rails[k][b]] += 1
        for m, c in anc:
            o[m] += c
        return o

    basis = list(itertools.product((0, 1), repeat=n))
    v = np.zeros((d, d), dtype=complex)
    for x, bx in enumerate(basis):
        for y, by in enumerate(basis):
            v[y, x] = amplitude(u, occ(bx, anc_in), occ(by, anc_out))
    return v


def num(x):
    """A float as trilane source text, with all 17 significant digits."""
    return repr(float(x))


def complex_literal(z):
    sign = "+" if z.imag >= 0 else "-"
    return f"{num(z.real)}{sign}{num(abs(z.imag))}i"


def matrix_literal(u):
    return "[" + ", ".join("[" + ", ".join(complex_literal(z) for z in row) + "]" for row in u) + "]"


# --------------------------------------------------------------------------
# Running trilane
# --------------------------------------------------------------------------


def simulate(trilane, tmp_path, source, *args):
    src = tmp_path / "c.trl"
    src.write_text(source)
    out = trilane("simulate", str(src), "--json", *args)
    assert out.returncode == 0, out.stderr
    return json.loads(out.stdout), out.stderr


def cmat(obj):
    return np.array(obj["re"], dtype=float) + 1j * np.array(obj["im"], dtype=float)


def camp(obj):
    return complex(obj["re"], obj["im"])


def up_to_global_phase(a, b):
    """Distance between a and b after the best global phase on b."""
    overlap = np.vdot(b, a)
    phase = overlap / abs(overlap) if abs(overlap) > 0 else 1
    return np.max(np.abs(a - phase * b))


# --------------------------------------------------------------------------
# 0. The reference itself
# --------------------------------------------------------------------------


def test_reference_permanent():
    # Ryser against the definition on random complex matrices, and two
    # classical values: perm(J_n) = n! and perm(J_n - I_n) = D_n, the number
    # of derangements (D_5 = 44; e.g. Stanley, Enumerative Combinatorics 1,
    # 2nd ed., section 2.2).
    rng = np.random.default_rng(7)
    for n in range(1, 6):
        a = rng.normal(size=(n, n)) + 1j * rng.normal(size=(n, n))
        assert abs(permanent(a) - permanent_brute(a)) < 1e-10
    assert abs(permanent(np.ones((5, 5))) - 120) < 1e-9
    assert abs(permanent(np.ones((5, 5)) - np.eye(5)) - 44) < 1e-9
    # The Haar sampler gives unitaries.
    u = haar_unitary(6, 1)
    assert np.max(np.abs(u.conj().T @ u - np.eye(6))) < 1e-12


# --------------------------------------------------------------------------
# 1. One-qubit gates and SWAP: the mode unitary and the logical map
# --------------------------------------------------------------------------

ONE_QUBIT = list(FIXED_GATES) + ["RX", "RY", "RZ", "P"]


def random_gate_circuit(n_qubits, n_ops, seed):
    """Our own random scenario: a list of (source line, mode block, qubit op)."""
    rng = np.random.default_rng(seed)
    names = [chr(ord("a") + k) for k in range(n_qubits)]
    ops = []
    for _ in range(n_ops):
        if rng.random() < 0.2:
            p, q = sorted(rng.choice(n_qubits, size=2, replace=False))
            ops.append((f"SWAP on {names[p]}, {names[q]}", ("swap", p, q)))
            continue
        k = int(rng.integers(n_qubits))
        g = ONE_QUBIT[int(rng.integers(len(ONE_QUBIT)))]
        if g in FIXED_GATES:
            ops.append((f"{g} on {names[k]}", ("one", k, FIXED_GATES[g])))
        else:
            t = float(rng.uniform(-math.pi, math.pi))
            ops.append((f"{g}({num(t)}) on {names[k]}", ("one", k, angle_gate(g, t))))
    return names, ops


def expected_gate_circuit(n_qubits, ops):
    """The 2n x 2n mode unitary (q.0 at 2k, q.1 at 2k+1) and the 2^n x 2^n
    logical unitary (kron, first qubit most significant), built separately."""
    n_modes, d = 2 * n_qubits, 2**n_qubits
    modes = np.eye(n_modes, dtype=complex)
    logical = np.eye(d, dtype=complex)
    for _, op in ops:
        if op[0] == "one":
            _, k, g = op
            modes = embed(n_modes, [2 * k, 2 * k + 1], g) @ modes
            factors = [np.eye(2)] * n_qubits
            factors[k] = g
            full = factors[0]
            for f in factors[1:]:
                full = np.kron(full, f)
            logical = full @ logical
        else:
            _, p, q = op
            # SWAP exchanges p.0 <-> q.0 and p.1 <-> q.1 ...
            perm = list(range(n_modes))
            perm[2 * p], perm[2 * q] = 2 * q, 2 * p
            perm[2 * p + 1], perm[2 * q + 1] = 2 * q + 1, 2 * p + 1
            modes = np.eye(n_modes, dtype=complex)[perm] @ modes
            # ... and on the logical basis swaps bits p and q.
            s = np.zeros((d, d), dtype=complex)
            for x in range(d):
                bits = [(x >> (n_qubits - 1 - j)) & 1 for j in range(n_qubits)]
                bits[p], bits[q] = bits[q], bits[p]
                y = sum(b << (n_qubits - 1 - j) for j, b in enumerate(bits))
                s[y, x] = 1
            logical = s @ logical
    return modes, logical


def every_gate_circuit():
    """Every one-qubit gate once, spread over three qubits, with SWAPs between."""
    names, ops = ["a", "b", "c"], []
    for j, g in enumerate(ONE_QUBIT):
        k = j % 3
        if g in FIXED_GATES:
            ops.append((f"{g} on {names[k]}", ("one", k, FIXED_GATES[g])))
        else:
            t = 0.4 + 0.3 * j
            ops.append((f"{g}({num(t)}) on {names[k]}", ("one", k, angle_gate(g, t))))
        if j % 4 == 3:
            p, q = (0, 2) if j % 8 == 3 else (1, 2)
            ops.append((f"SWAP on {names[p]}, {names[q]}", ("swap", p, q)))
    return names, ops


@pytest.mark.parametrize("n_qubits,seed", [(3, None), (2, 11), (2, 12), (3, 13), (3, 14), (3, 15), (3, 16)])
def test_gate_circuit_matches_gate_table(trilane, tmp_path, n_qubits, seed):
    names, ops = every_gate_circuit() if seed is None else random_gate_circuit(n_qubits, 12, seed)
    body = "\n".join(f"    {line}" for line, _ in ops)
    source = f"chip g {{\n    dualrail {', '.join(names)}\n{body}\n}}\n"
    d, _ = simulate(trilane, tmp_path, source)
    want_modes, want_logical = expected_gate_circuit(n_qubits, ops)

    assert d["modes"] == [f"{q}.{r}" for q in names for r in (0, 1)]
    assert np.max(np.abs(cmat(d["mode_unitary"]) - want_modes)) < TOL, source
    assert d["logical_basis"] == ["".join(b) for b in itertools.product("01", repeat=n_qubits)]
    v = cmat(d["logical_map"])
    assert np.max(np.abs(v - want_logical)) < TOL, source
    # Our kron product is the same map our permanents give from our mode
    # matrix (one photon per qubit, no ancillas): the two references agree.
    rails = [(2 * k, 2 * k + 1) for k in range(n_qubits)]
    assert np.max(np.abs(logical_map_from_modes(want_modes, rails) - want_logical)) < TOL
    # Deterministic circuit: success 1, and it is its own target.
    assert d["scheme_success"] == pytest.approx(1, abs=TOL)
    assert d["fidelity_kind"] == "process"
    assert d["target_kind"] == "gates"
    assert d["process_fidelity"] == pytest.approx(1, abs=1e-12)


def test_mode_elements_match_their_formulas(trilane, tmp_path):
    # rotate(theta, phi) = [[e^{i phi} cos t, -sin t], [e^{i phi} sin t, cos t]]
    # (the block of Clements et al., Optica 3, 1460 (2016), as documented);
    # split(c) = [[sqrt(1-c), -sqrt(c)], [sqrt(c), sqrt(1-c)]]; phase(x) = e^{ix}.
    th, ph, c, x = 0.7321, -1.234, 0.3, 2.1
    source = (
        "chip e {\n    mode m0, m1, m2\n    launch m0 = 1 photon\n"
        f"    rotate({th}, {ph}) on m0, m2\n    split({c}) on m1, m0\n    phase({x}) on m2\n}}\n"
    )
    d, _ = simulate(trilane, tmp_path, source)
    rot = np.array([[np.exp(1j * ph) * math.cos(th), -math.sin(th)], [np.exp(1j * ph) * math.sin(th), math.cos(th)]])
    spl = np.array([[math.sqrt(1 - c), -math.sqrt(c)], [math.sqrt(c), math.sqrt(1 - c)]])
    want = embed(3, [2], np.exp(1j * x)) @ embed(3, [1, 0], spl) @ embed(3, [0, 2], rot)
    assert np.max(np.abs(cmat(d["mode_unitary"]) - want)) < TOL
    # `rotate(t/2, 0)` on a qubit's rails is RY(t) (Nielsen & Chuang 2000).
    t = 1.1
    d, _ = simulate(trilane, tmp_path, f"chip r {{\n    dualrail q\n    rotate({t / 2}, 0) on q.0, q.1\n}}\n")
    assert np.max(np.abs(cmat(d["logical_map"]) - angle_gate("RY", t))) < TOL


# --------------------------------------------------------------------------
# 2. Haar-random networks: every output probability by our permanents
# --------------------------------------------------------------------------

# (modes, launch photons per mode, seed); some modes carry two photons.
RANDOM_NETWORKS = [
    (5, (2, 0, 1, 0, 0), 101),
    (6, (0, 1, 0, 0, 1, 0), 102),
    (7, (1, 0, 0, 2, 0, 0, 0), 103),
    (6, (2, 0, 0, 0, 0, 1), 104),
]


def network_source(n, launch, u):
    names = [f"m{k}" for k in range(n)]
    launches = ", ".join(f"m{k} = {p} photon{'s' if p != 1 else ''}" for k, p in enumerate(launch) if p)
    return (
        f"chip haar {{\n    mode {', '.join(names)}\n    launch {launches}\n"
        f"    unitary on m0 ... m{n - 1} = {matrix_literal(u)}\n}}\n"
    )


@pytest.mark.parametrize("n,launch,seed", RANDOM_NETWORKS)
def test_random_network_distribution(trilane, tmp_path, n, launch, seed):
    u = haar_unitary(n, seed)
    d, _ = simulate(trilane, tmp_path, network_source(n, launch, u))
    assert d["modes"] == [f"m{k}" for k in range(n)]
    assert d["launch"] == list(launch)
    # The literal was written with 17 digits: the network is our matrix.
    assert np.max(np.abs(cmat(d["mode_unitary"]) - u)) < TOL

    want = {t: amplitude(u, launch, t) for t in patterns(sum(launch), n)}
    assert sum(abs(a) ** 2 for a in want.values()) == pytest.approx(1, abs=1e-12)
    listed = {}
    for entry in d["distribution"]:
        t = tuple(entry["occupation"])
        assert t not in listed, "pattern listed twice"
        listed[t] = entry
        assert entry["probability"] == pytest.approx(abs(want[t]) ** 2, abs=1e-10), t
        # The amplitude, phase included (no detect: no output-phase freedom).
        assert abs(camp(entry["amplitude"]) - want[t]) < 1e-10, t
        assert entry["logical"] is None  # free modes only: no qubits
    for t, a in want.items():
        if t not in listed:
            assert abs(a) ** 2 < 1e-12, f"pattern {t} missing, probability {abs(a) ** 2}"
    assert d["total_probability"] == pytest.approx(1, abs=1e-12)


def test_random_network_single_output_amplitude(trilane, tmp_path):
    n, launch, seed = 7, (1, 0, 0, 2, 0, 0, 0), 103
    u = haar_unitary(n, seed)
    src = network_source(n, launch, u)
    for out in [(0, 2, 0, 0, 0, 1, 0), (1, 0, 1, 0, 1, 0, 0), (0, 0, 0, 0, 0, 0, 3)]:
        d, _ = simulate(trilane, tmp_path, src, "--output", ",".join(map(str, out)))
        assert d["occupation"] == list(out)
        assert d["logical_map"] is None
        want = amplitude(u, launch, out)
        assert abs(camp(d["amplitude"]) - want) < 1e-10, out
        assert d["probability"] == pytest.approx(abs(want) ** 2, abs=1e-10)


# --------------------------------------------------------------------------
# 3. Hong-Ou-Mandel
# --------------------------------------------------------------------------


@pytest.mark.parametrize("r", [0.0, 0.1, 0.25, 0.5, 0.7, 1.0])
def test_hong_ou_mandel(trilane, tmp_path, r):
    # Two photons, one in each input of a splitter of reflectivity R: the
    # coincidence probability is (1 - 2R)^2, zero at 50:50 (Hong, Ou &
    # Mandel, PRL 59, 2044 (1987)); the rest bunches, 2R(1-R) each side.
    source = f"chip hom {{\n    mode m0, m1\n    launch m0 = 1 photon, m1 = 1 photon\n    split({r}) on m0, m1\n}}\n"
    d, _ = simulate(trilane, tmp_path, source, "--output", "1,1")
    assert d["probability"] == pytest.approx((1 - 2 * r) ** 2, abs=1e-12)
    d, _ = simulate(trilane, tmp_path, source)
    probs = {tuple(e["occupation"]): e["probability"] for e in d["distribution"]}
    for t in [(2, 0), (0, 2)]:
        assert probs.get(t, 0.0) == pytest.approx(2 * r * (1 - r), abs=1e-12)


# --------------------------------------------------------------------------
# 4. The post-selected CZ (Ralph, Langford, Bell & White 2002) and CNOT
# --------------------------------------------------------------------------

_A, _B = 1 / math.sqrt(3), math.sqrt(2 / 3)
# The Ralph et al. (2002) network on c0, c1, t0, t1, v1, v2: 1/3 splitters
# on c1-t1 and on c0-v1, t0-v2 (a = 1/sqrt 3, b = sqrt(2/3)), as written in
# the project's design notes.
RALPH = np.array(
    [
        [_A, 0, 0, 0, _B, 0],
        [0, -_A, 0, _B, 0, 0],
        [0, 0, _A, 0, 0, _B],
        [0, _B, 0, _A, 0, 0],
        [_B, 0, 0, 0, -_A, 0],
        [0, 0, _B, 0, 0, -_A],
    ],
    dtype=complex,
)


def test_ralph_network_reference():
    # Independent of trilane: the network is unitary and, conditioned on one
    # photon per qubit (vacuum modes empty), gives (1/3) diag(1, 1, -1, 1),
    # the CZ of Ralph et al. (2002) up to a Z on the control, success 1/9.
    assert np.max(np.abs(RALPH.conj().T @ RALPH - np.eye(6))) < 1e-15
    v = logical_map_from_modes(RALPH, [(0, 1), (2, 3)], [(4, 0), (5, 0)], [(4, 0), (5, 0)])
    assert np.max(np.abs(v - np.diag([1, 1, -1, 1]) / 3)) < TOL
    assert np.real(np.trace(v.conj().T @ v)) / 4 == pytest.approx(1 / 9, abs=TOL)


def test_post_selected_cz(trilane, tmp_path):
    d, _ = simulate(trilane, tmp_path, "chip cz {\n    dualrail a, b\n    CZ on a, b\n}\n")
    assert d["modes"] == ["a.0", "a.1", "b.0", "b.1", "cz1.v0", "cz1.v1"]
    assert d["launch"] == [1, 0, 1, 0, 0, 0]
    # trilane's network is the Ralph network with a phase pi on the c1
    # output (row 1), which turns diag(1, 1, -1, 1) into CZ.
    want_u = RALPH.copy()
    want_u[1] *= -1
    u = cmat(d["mode_unitary"])
    assert np.max(np.abs(u - want_u)) < TOL
    # Its map by our permanents from our matrix, and trilane's, both (1/3) CZ:
    # exactly, and so also up to a global phase.
    vacuum = [(4, 0), (5, 0)]
    ours = logical_map_from_modes(want_u, [(0, 1), (2, 3)], vacuum, vacuum)
    assert np.max(np.abs(ours - CZ / 3)) < TOL
    v = cmat(d["logical_map"])
    assert up_to_global_phase(v, CZ / 3) < TOL
    assert np.max(np.abs(v - CZ / 3)) < TOL
    assert d["scheme_success"] == pytest.approx(1 / 9, abs=TOL)  # Ralph et al. (2002)
    assert d["process_fidelity"] == pytest.approx(1, abs=1e-12)
    # The launch |00>: each output pattern against our amplitude, and its
    # logical label only when each qubit holds one photon, vacuum modes empty.
    for e in d["distribution"]:
        t = e["occupation"]
        assert abs(camp(e["amplitude"]) - amplitude(want_u, [1, 0, 1, 0, 0, 0], t)) < 1e-12
        logical = t[0] + t[1] == 1 and t[2] + t[3] == 1 and t[4] == t[5] == 0
        assert e["logical"] == (f"{t[1]}{t[3]}" if logical else None), t


def test_post_selected_cnot(trilane, tmp_path):
    # CNOT = (I x H) CZ (I x H) (Nielsen & Chuang 2000): the same 1/9 scheme.
    d, _ = simulate(trilane, tmp_path, "chip cx {\n    dualrail a, b\n    CNOT on a, b\n}\n")
    v = cmat(d["logical_map"])
    assert up_to_global_phase(v, CNOT / 3) < TOL
    assert np.max(np.abs(v - CNOT / 3)) < TOL
    assert d["scheme_success"] == pytest.approx(1 / 9, abs=TOL)
    # trilane's map is what our permanents make of its own network.
    vacuum = [(4, 0), (5, 0)]
    ours = logical_map_from_modes(cmat(d["mode_unitary"]), [(0, 1), (2, 3)], vacuum, vacuum)
    assert np.max(np.abs(ours - v)) < TOL


# --------------------------------------------------------------------------
# 5. The heralded CZ (Knill 2002)
# --------------------------------------------------------------------------


def test_heralded_cz(trilane, tmp_path):
    d, _ = simulate(trilane, tmp_path, "chip kh {\n    dualrail a, b\n    CZ heralded on a, b\n    detect a, b\n}\n")
    assert d["modes"] == ["a.0", "a.1", "b.0", "b.1", "czh1.h0", "czh1.h1"]
    assert d["launch"] == [1, 0, 1, 0, 1, 1]
    u = cmat(d["mode_unitary"])
    assert np.max(np.abs(u.conj().T @ u - np.eye(6))) < 1e-12
    # Knill, PRA 66, 052306 (2002): two ancilla photons, success 2/27.
    v = cmat(d["logical_map"])
    assert np.max(np.abs(v - math.sqrt(2 / 27) * CZ)) < TOL
    assert d["scheme_success"] == pytest.approx(2 / 27, abs=TOL)
    # The map is what our permanents give from trilane's network, one photon
    # in and one heralded out of each ancilla mode.
    heralds = [(4, 1), (5, 1)]
    ours = logical_map_from_modes(u, [(0, 1), (2, 3)], heralds, heralds)
    assert np.max(np.abs(ours - v)) < TOL


# --------------------------------------------------------------------------
# 6. Two post-selected CZs on one pair do not compose
# --------------------------------------------------------------------------

CASCADE = "chip twice {\n    dualrail a, b\n    CZ on a, b\n    CZ on a, b\n}\n"


def cascade_network():
    """Our 8-mode network for two post-selected CZs: each is the Ralph network
    with row c1 negated (test 4), on a.0 a.1 b.0 b.1 and its own vacuum pair."""
    g = RALPH.copy()
    g[1] *= -1
    return embed(8, [0, 1, 2, 3, 6, 7], g) @ embed(8, [0, 1, 2, 3, 4, 5], g)


def test_cascaded_post_selected_cz(trilane, tmp_path):
    d, err = simulate(trilane, tmp_path, CASCADE)
    assert d["modes"] == ["a.0", "a.1", "b.0", "b.1", "cz1.v0", "cz1.v1", "cz2.v0", "cz2.v1"]
    assert "cascaded-post-selection" in err
    assert "cascaded-post-selection" in [w["code"] for w in d["warnings"]]

    u = cmat(d["mode_unitary"])
    assert np.max(np.abs(u - cascade_network())) < TOL
    vacuum = [(m, 0) for m in (4, 5, 6, 7)]
    ours = logical_map_from_modes(cascade_network(), [(0, 1), (2, 3)], vacuum, vacuum)
    v = cmat(d["logical_map"])
    assert np.max(np.abs(ours - v)) < TOL
    # Were the two gates to compose, the map would be (1/3 CZ)^2 = (1/9) I.
    # It is not: a failure of the first gate (two photons in one qubit's
    # rails, vacuum modes still empty) can pass the second post-selection.
    assert np.linalg.norm(v - np.eye(4) / 9) > 0.01
    assert np.linalg.norm(v - np.eye(4) / 81) > 0.01
    # Success and process fidelity against the identity, from our own map
    # (no detect: the plain process fidelity |Tr(Vt^dag V)|^2 / (d Tr V^dag V)).
    norm = np.real(np.trace(ours.conj().T @ ours))
    assert d["scheme_success"] == pytest.approx(norm / 4, abs=1e-12)
    assert d["fidelity_kind"] == "process"
    assert d["process_fidelity"] == pytest.approx(abs(np.trace(ours)) ** 2 / (4 * norm), abs=1e-12)
    assert d["process_fidelity"] < 0.99


def test_cascaded_post_selected_cz_detect_fidelity(trilane, tmp_path):
    # With `detect`, the fidelity is maximised over diagonal output phases:
    # F = (sum_y |sum_x conj(Vt[y,x]) V[y,x]|)^2 / (d Tr V^dag V), Vt = I here.
    d, _ = simulate(trilane, tmp_path, CASCADE.replace("}\n", "    detect a, b\n}\n"))
    vacuum = [(m, 0) for m in (4, 5, 6, 7)]
    ours = logical_map_from_modes(cascade_network(), [(0, 1), (2, 3)], vacuum, vacuum)
    norm = np.real(np.trace(ours.conj().T @ ours))
    f_detect = np.sum(np.abs(np.diag(ours))) ** 2 / (4 * norm)
    assert d["fidelity_kind"] == "detect"
    assert d["process_fidelity"] == pytest.approx(f_detect, abs=1e-12)
    # The plain process fidelity is still given beside it.
    f_pro = abs(np.trace(ours)) ** 2 / (4 * norm)
    assert d["process_fidelity_with_phases"] == pytest.approx(f_pro, abs=1e-12)
    assert f_pro < f_detect < 1
    # Average gate fidelity (d F + 1) / (d + 1): Horodecki, Horodecki &
    # Horodecki, PRA 60, 1888 (1999); Nielsen, Phys. Lett. A 303, 249 (2002).
    assert d["average_gate_fidelity"] == pytest.approx((4 * f_detect + 1) / 5, abs=1e-12)


# --------------------------------------------------------------------------
# 7. Command-line errors
# --------------------------------------------------------------------------


def test_output_of_wrong_length_is_refused(trilane, tmp_path):
    src = tmp_path / "c.trl"
    src.write_text("chip cz {\n    dualrail a, b\n    CZ on a, b\n}\n")
    out = trilane("simulate", str(src), "--json", "--output", "1,0,1")
    assert out.returncode == 2
    for name in ["a.0", "a.1", "b.0", "b.1", "cz1.v0", "cz1.v1"]:
        assert name in out.stderr, out.stderr


def test_launch_of_unknown_name_is_refused(trilane, tmp_path):
    src = tmp_path / "c.trl"
    src.write_text("chip s {\n    dualrail a\n    H on a\n}\n")
    out = trilane("simulate", str(src), "--json", "--launch", "zz=1")
    assert out.returncode == 2
    assert "zz" in out.stderr, out.stderr
