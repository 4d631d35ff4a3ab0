"""Gating: the chi-square gate threshold."""

from __future__ import annotations

import math

import pytest

from harbourwatch.filter._gating import chi2_gate


@pytest.mark.parametrize("p", [0.5, 0.9, 0.99, 0.999, 0.9999, 0.9999546])
def test_two_dimensional_gate_closed_form(p: float) -> None:
    # chi-square with 2 degrees of freedom is exponential with mean 2, so its
    # P-quantile is -2 ln(1 - P) (standard distribution fact).
    assert chi2_gate(p) == pytest.approx(-2.0 * math.log1p(-p), rel=1e-12)


def test_gate_reference_values() -> None:
    # Chi-square quantile tables (e.g. NIST/SEMATECH e-Handbook of Statistical
    # Methods, table 1.3.6.7.4 -- from memory for the table number): upper 1 % point
    # for 1 dof is 6.635, for 3 dof 11.345.
    assert chi2_gate(0.99, dim=1) == pytest.approx(6.635, abs=5e-4)
    assert chi2_gate(0.99, dim=3) == pytest.approx(11.345, abs=5e-4)
    # 1 dof: the gate is the squared two-sided normal quantile (1.959964^2 for 95 %).
    assert chi2_gate(0.95, dim=1) == pytest.approx(1.959963984540054**2, rel=1e-10)


@pytest.mark.parametrize("p", [0.0, 1.0, -0.1, 1.5])
def test_gate_probability_out_of_range(p: float) -> None:
    with pytest.raises(ValueError):
        chi2_gate(p)
