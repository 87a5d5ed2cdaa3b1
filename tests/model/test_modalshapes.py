"""Mode shapes from modal constants: the rank-one split and driving-point scaling by their
defining relations (A = φ_out φ_inᵀ for mass-normalized real modes; A_pp = φ_p²)."""

import numpy as np
import pytest

from dampctl.errors import MeasurementError
from dampctl.model.modalshapes import modal_constants, site_layout, split_shapes

PHI = np.array([[0.8, -0.3, 0.5], [0.2, 0.9, -0.6]])  # mode × site (a, b, c), mass-normalized


def _constants(outputs, inputs):
    """A[i, o, j] = φ_i(o) φ_i(j) for outputs and inputs given as site indices."""
    return np.array([np.outer(p[outputs], p[inputs]) for p in PHI])


def test_residues_of_real_modes_give_real_constants():
    # r = φφ/(2jω_d) for mass-normalized real modes (D. J. Ewins, Modal Testing, 2nd ed. 2000,
    # from memory): the constants come back as φφ, with no turn.
    poles = np.array([-2.0 + 600.0j, -5.0 + 1500.0j])
    a = _constants([0, 1], [0])
    residues = a / (2j * poles.imag[:, None, None])
    constants, turn = modal_constants(poles, residues * np.exp(0j))
    np.testing.assert_allclose(constants, a, rtol=1e-14)
    np.testing.assert_allclose(turn, 0.0, atol=1e-12)
    turned, turn = modal_constants(poles, residues * np.exp(0.3j))
    np.testing.assert_allclose(turned, a, rtol=1e-12)
    np.testing.assert_allclose(turn, np.degrees(0.3), rtol=1e-12)


def test_driving_point_gives_mass_normalized_shapes_at_every_site():
    # outputs at a, b, c; inputs at a (driving point) and c: all three sites are known
    a = _constants([0, 1, 2], [0, 2])
    shapes = split_shapes(a, np.array([100.0, 240.0]), outputs=["a", "b", "c"],
                          inputs=["fa", "fc"], output_kinds=["displacement"] * 3,
                          driving_points=[(0, 0)])
    assert shapes.sites == ("a", "b", "c", "fc")
    assert shapes.input_sites == ("a", "fc")
    expected = np.column_stack([PHI, PHI[:, 2]]) * np.sign(PHI[:, :1])
    np.testing.assert_allclose(shapes.shapes, expected, rtol=1e-12)
    np.testing.assert_allclose(shapes.modal_mass_kg, 1.0 / PHI[:, 0] ** 2, rtol=1e-12)
    assert shapes.scaled.all() and not shapes.warnings


def test_a_mode_not_seen_at_the_driving_point_stays_unscaled():
    phi = PHI.copy()
    phi[1, 0] = 0.0
    a = np.array([np.outer(p[[0, 1]], p[[0, 2]]) for p in phi])
    shapes = split_shapes(a, np.array([100.0, 240.0]), outputs=["a", "b"], inputs=["fa", "fc"],
                          output_kinds=["velocity"] * 2, driving_points=[(0, 0)])
    assert shapes.scaled.tolist() == [True, False]
    assert np.isnan(shapes.modal_mass_kg[1])
    assert any("mode 2 (240 Hz): not seen at any driving point" in w for w in shapes.warnings)
    # its products over the measured channels are still right
    np.testing.assert_allclose(shapes.shapes[1, 1] * shapes.shapes[1, 2], a[1, 1, 1], rtol=1e-12)


def test_a_negative_driving_point_constant_is_reported():
    a = _constants([0, 1], [0])
    a[0, 0, 0] *= -1
    shapes = split_shapes(a, np.array([100.0, 240.0]), outputs=["a", "b"], inputs=["fa"],
                          output_kinds=["displacement"] * 2, driving_points=[(0, 0)])
    assert not shapes.scaled[0]
    assert any("negative modal constant" in w for w in shapes.warnings)


def test_without_driving_point_products_are_kept():
    a = _constants([1, 2], [0])
    shapes = split_shapes(a, np.array([100.0, 240.0]), outputs=["b", "c"], inputs=["fa"],
                          output_kinds=["acceleration", "force"])
    assert shapes.sites == ("b", "fa")  # a force output has no site
    assert shapes.output_sites == ("b", None)
    products = shapes.shapes[:, 0] * shapes.shapes[:, 1]
    np.testing.assert_allclose(products, a[:, 0, 0], rtol=1e-12)
    assert any("no driving point" in w for w in shapes.warnings)


def test_inconsistent_inputs_are_reported():
    a = _constants([0, 1, 2], [0, 2])
    a[0, :, 1] = np.array([0.1, 0.9, -0.4])  # input c sees another shape for mode 1
    shapes = split_shapes(a, np.array([100.0, 240.0]), outputs=["a", "b", "c"],
                          inputs=["fa", "fc"], output_kinds=["displacement"] * 3,
                          driving_points=[(0, 0)])
    assert any("mode 1 (100 Hz): the inputs see different shapes" in w for w in shapes.warnings)


def test_site_clash_and_force_only():
    with pytest.raises(MeasurementError, match="input 'a' has the name of an output"):
        site_layout(["a"], ["a"], ["displacement"], [])
    assert site_layout(["a"], ["a"], ["displacement"], [(0, 0)])[0] == ("a",)
    with pytest.raises(MeasurementError, match="every output is a force"):
        split_shapes(np.ones((1, 1, 1)), np.array([10.0]), outputs=["a"], inputs=["f"],
                     output_kinds=["force"])
