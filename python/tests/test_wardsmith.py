"""Tests of the Python module: the same engine as the command line.

Run from the repository root after `pip install ./python` (the Rust test
`tests/python.rs` does both in a virtual environment of its own).
"""

import math
import os

import numpy as np
import pytest

import wardsmith

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))


def example(name: str) -> str:
    return os.path.join(ROOT, "examples", name)


# --- checking files -------------------------------------------------------


def test_an_example_checks_as_on_the_command_line():
    out = wardsmith.check_file(example("wall-displacement.ward"))
    assert out.passed and out.exit_code == 0
    assert out.statements, "the example has statements"
    # A bare `simplify` is printed, not judged; every other statement holds.
    assert any(s.kind == "simplify" for s in out.statements)
    judged = [s for s in out.statements if s.kind != "simplify"]
    assert judged and all(s.status in ("proved", "proved_away", "confirmed") for s in judged)
    assert out.counts["proved"] >= 1 and out.counts["not_proved"] == 0
    # The reports are the command line's.
    assert out.text.rstrip().endswith(f"{out.counts['proved']} proved, 0 not proved")
    assert "\\begin{align*}" in out.latex
    assert out.document["exit_code"] == 0


def test_a_derivation_with_a_slip_shows_its_steps():
    # A derivation whose second step drops the factor 2 of the derivative of
    # a square (common practice: d/dx x^2 = 2x); the first step holds.
    text = """
dimension 4
points x1 x2
parameters Delta
derivation slip
    ∂[mu](x1) { |x1 - x2|^(-2 Delta) }
  = -Delta |x1 - x2|^(-2 Delta - 2) ∂[mu](x1) { |x1 - x2|^2 }
  = -Delta |x1 - x2|^(-2 Delta - 2) (x1[mu] - x2[mu])
end
"""
    out = wardsmith.check_text(text, name="slip.ward")
    assert not out.passed and out.exit_code == 1
    [d] = out.of_kind("derivation")
    assert d.name == "slip"
    steps = d.steps
    assert len(steps) == 2
    # The chain rule holds where |x1 - x2| is smooth.
    assert steps[0].status == "proved_away"
    assert steps[1].status == "not_proved"
    assert steps[1].slip.slip == "factor"
    assert steps[1].slip.ratio.text == "2"
    assert out.counts["not_proved"] == 1


def test_an_input_error_names_line_and_column():
    with pytest.raises(wardsmith.WardError) as err:
        wardsmith.check_text("dimension 4\nscalr O dim 1\n", name="typo.ward")
    assert err.value.line == 2
    assert err.value.column == 1
    assert "typo.ward:2:1" in str(err.value)
    assert "scalar" in str(err.value)


# --- evaluating on a grid -------------------------------------------------

FREE_SCALAR = """
dimension 4
points x x1 x2
scalar phi dim 1
model free-scalar with phi = phi
"""


def osborn_petkou_t_phi_phi(x, x1, x2, d=4):
    """<T_mu nu(x) phi(x1) phi(x2)> of the real free scalar in d dimensions.

    Osborn & Petkou 1994 (hep-th/9307010): a h_mu nu(X^) / (x_01^d x_02^d
    x_12^(2 Delta - d)), X = x_10/x_10^2 - x_20/x_20^2, h = X^ X^ - delta/d,
    with a = -d Delta C_phi / ((d - 1) S_d), Delta = d/2 - 1,
    C_phi = 1/((d - 2) S_d) (common practice), S_d = 2 pi^(d/2)/Gamma(d/2).
    """
    s_d = 2 * math.pi ** (d / 2) / math.gamma(d / 2)
    delta = d / 2 - 1
    c_phi = 1 / ((d - 2) * s_d)
    a = -d * delta * c_phi / ((d - 1) * s_d)
    x10, x20 = x1 - x, x2 - x
    X = x10 / (x10 @ x10) - x20 / (x20 @ x20)
    Xh = X / np.linalg.norm(X)
    h = np.outer(Xh, Xh) - np.eye(d) / d
    r01, r02 = np.linalg.norm(x10), np.linalg.norm(x20)
    r12 = np.linalg.norm(x2 - x1)
    return a * h / (r01**d * r02**d * r12 ** (2 * delta - d))


def test_free_scalar_t_phi_phi_on_a_grid():
    rng = np.random.default_rng(20261202)
    rows = 12
    x = rng.normal(size=(rows, 4))
    x1 = rng.normal(size=(rows, 4)) + 3.0
    x2 = np.array([0.2, -0.1, 0.4, 0.3])
    got = wardsmith.evaluate(
        FREE_SCALAR,
        "<T[mu,nu](x) phi(x1) phi(x2)>",
        points={"x": x, "x1": x1, "x2": x2},
    )
    assert got.shape == (rows, 16)
    for k in range(rows):
        want = osborn_petkou_t_phi_phi(x[k], x1[k], x2).reshape(16)
        np.testing.assert_allclose(got[k], want, rtol=1e-10, atol=1e-13 * np.abs(want).max())


def test_the_grid_agrees_with_the_files_evaluate():
    # The same row through a file's `evaluate` statement (the command line's
    # path) and through the grid.
    text = FREE_SCALAR + "place x at (0.1, 0.2, 0.3, 0.4)\nplace x1 at (1, 2, 0, 1)\nplace x2 at (-1, 0, 1, 0)\n"
    out = wardsmith.check_text(text + "evaluate <T[0,1](x) phi(x1) phi(x2)>\n")
    [e] = out.of_kind("evaluate")
    file_value = e.components[0].value.value
    grid = wardsmith.evaluate(text, "<T[0,1](x) phi(x1) phi(x2)>")
    assert grid.shape == (1,)
    assert grid[0] == pytest.approx(file_value, rel=1e-14)


def test_parameters_on_a_grid_and_errors():
    text = "dimension 3\npoints x1 x2\nparameters a\nmodel conformal\nvalues a = 1\n"
    got = wardsmith.evaluate(
        text,
        "a |x1 - x2|^(-2)",
        points={"x1": [0.0, 0.0, 0.0], "x2": [[1.0, 0, 0], [2.0, 0, 0], [0, 0, 4.0]]},
        values={"a": [1.0, 2.0, 3.0]},
    )
    np.testing.assert_allclose(got, [1.0, 0.5, 3.0 / 16.0], rtol=1e-15)
    with pytest.raises(wardsmith.WardError, match="not a point"):
        wardsmith.evaluate(text, "a", points={"x9": [0.0, 0, 0]})
    with pytest.raises(wardsmith.WardError, match="coordinates"):
        wardsmith.evaluate(text, "a", points={"x1": [0.0, 0]})
    with pytest.raises(wardsmith.WardError) as err:
        wardsmith.evaluate(text, "a +* 1")
    assert err.value.line is not None


def test_a_boundary_point_off_the_wall_is_an_error():
    text = "dimension 3\nhalfspace y >= 0\npoints x1\nboundary points s1\nmodel conformal\n"
    with pytest.raises(wardsmith.WardError, match="on the wall"):
        wardsmith.evaluate(text, "|x1 - s1|", points={"x1": [0, 0, 1.0], "s1": [0, 0, 0.5]})


# --- scans ----------------------------------------------------------------


def test_a_scan_gives_its_table():
    path = os.path.join(ROOT, "tests", "cases", "numeric", "components-moving-point.ward")
    out = wardsmith.check_file(path)
    scans = out.scans()
    assert len(scans) == len(out.of_kind("scan")) >= 1
    assert all(s.status == "confirmed" for s in scans)
    scan = scans[0]
    assert scan.parameter_name == "h"
    assert scan.parameter.shape == (7,)
    assert scan.left.shape == scan.right.shape == (7, 1)
    np.testing.assert_allclose(scan.left, scan.right, rtol=1e-12)
    assert scan.parameter[0] == pytest.approx(0.1) and scan.parameter[-1] == pytest.approx(2.0)


# --- the README's Python blocks run as written ------------------------------


def test_readme_python_blocks_run(monkeypatch):
    import re

    with open(os.path.join(ROOT, "README.md"), encoding="utf-8") as f:
        readme = f.read()
    blocks = re.findall(r"```python\n(.*?)```", readme, flags=re.S)
    assert blocks, "the README has a Python block"
    monkeypatch.chdir(ROOT)
    for block in blocks:
        scope = {}
        exec(compile(block, "README.md", "exec"), scope)
    # The block's own claims about its results.
    assert scope["out"].passed
    assert scope["T"].shape == (1000, 16)
    assert scope["scan"] and scope["scan"][0].status == "confirmed"
