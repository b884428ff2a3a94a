"""Angle expressions evaluated by trilane against mpmath at 40 digits.

mpmath (Johansson et al., mpmath: a Python library for arbitrary-precision
floating-point arithmetic, https://mpmath.org) is the outside reference:
each expression below is written once in trilane's syntax and once with
mpmath, and the elaborated angle (the IR dump of `trilane check --ir`,
printed to 12 decimals) must agree to 1e-11.
"""

import re

import mpmath as mp
import pytest

mp.mp.dps = 40
pi = mp.pi
deg = pi / 180

CASES = [
    ("sin(pi/6)", lambda: mp.sin(pi / 6)),
    ("2*asin(sqrt(1/3))", lambda: 2 * mp.asin(mp.sqrt(mp.mpf(1) / 3))),
    ("acos(-0.25) - atan(7)", lambda: mp.acos(mp.mpf(-0.25)) - mp.atan(7)),
    ("tan(1.2)*1e-3 + exp(-1.5)", lambda: mp.tan(mp.mpf("1.2")) * mp.mpf("1e-3") + mp.exp(mp.mpf("-1.5"))),
    ("ln(10)/ln(2)", lambda: mp.log(10) / mp.log(2)),
    ("2^3^0.5", lambda: mp.power(2, mp.power(3, mp.mpf("0.5")))),
    ("-2^2", lambda: -mp.power(2, 2)),
    ("2^-1.5", lambda: mp.power(2, mp.mpf("-1.5"))),
    ("(1 - (2 - 3))*4/(5*6)", lambda: mp.mpf(2) * 4 / 30),
    ("pi/2 + 30 deg", lambda: pi / 2 + 30 * deg),
    ("(pi/2 + 30) deg", lambda: (pi / 2 + 30) * deg),
    ("2*15 deg - 0.1", lambda: 30 * deg - mp.mpf("0.1")),
    ("-(180 - 60) deg", lambda: -120 * deg),
    ("sin(30 deg)*pi", lambda: mp.sin(30 * deg) * pi),
    ("atan(3) - atan(1/3)", lambda: mp.atan(3) - mp.atan(mp.mpf(1) / 3)),
    ("sqrt(2)/2 + cos(pi/5)^2", lambda: mp.sqrt(2) / 2 + mp.cos(pi / 5) ** 2),
    (".5e1 + 2.", lambda: mp.mpf(7)),
]


def angles(trilane, tmp_path, exprs):
    body = "\n".join(f"    RZ({e}) on q" for e in exprs)
    src = tmp_path / "x.trl"
    src.write_text(f"chip x {{\n    dualrail q\n{body}\n}}\n")
    out = trilane("check", "--ir", str(src))
    assert out.returncode == 0, out.stderr
    return [float(v) for v in re.findall(r"op RZ\(([-0-9.e]+)\)", out.stdout)]


def test_angles_match_mpmath(trilane, tmp_path):
    got = angles(trilane, tmp_path, [e for e, _ in CASES])
    assert len(got) == len(CASES)
    for (expr, ref), value in zip(CASES, got):
        want = float(ref())
        assert value == pytest.approx(want, abs=1e-11), expr


def test_complex_matrix_entry_matches_mpmath(trilane, tmp_path):
    # A 1 x 1 unitary e^{i pi/7} (Euler's formula), entry by entry.
    src = tmp_path / "u.trl"
    src.write_text("chip u {\n    mode m\n    unitary on m = [[exp(i*pi/7)]]\n}\n")
    out = trilane("check", "--ir", str(src))
    assert out.returncode == 0, out.stderr
    m = re.search(r"\[\[([-0-9.e]+)\+([-0-9.e]+)i\]\]", out.stdout)
    want = mp.exp(1j * pi / 7)
    assert float(m.group(1)) == pytest.approx(float(want.real), abs=1e-11)
    assert float(m.group(2)) == pytest.approx(float(want.imag), abs=1e-11)
