"""Two methods' G side by side (integrate/balance/method_comparison.py): the difference's standard
uncertainty with shared inputs, against JCGM 100:2008 eq. 13 written out by hand."""

from __future__ import annotations

import math

import pytest

from truepull.integrate.balance.method_comparison import compare


def test_difference_with_shared_inputs_follows_jcgm_100_eq_13():
    # JCGM 100:2008 eq. 13 for y = G_a - G_b with independent inputs: u^2(y) = sum (c_a,i - c_b,i)^2 u_i^2
    rows_a = [{"input": "body[x].radius", "sensitivity": 2.0, "u": 0.1}, {"input": "measurement.torque.A",
              "sensitivity": 1.0, "u": 0.3}]
    rows_b = [{"input": "body[x].radius", "sensitivity": 0.5, "u": 0.1}, {"input": "measurement.acceleration",
              "sensitivity": 3.0, "u": 0.2}]
    u_a, u_b = math.hypot(0.2, 0.3), math.hypot(0.05, 0.6)
    c = compare({"method": "servo", "G": 10.0, "u_G": u_a, "budget": rows_a},
                {"method": "acceleration", "G": 9.0, "u_G": u_b, "budget": rows_b})
    direct = math.sqrt(((2.0 - 0.5) * 0.1) ** 2 + 0.3**2 + 0.6**2)
    assert c["u_difference"] == pytest.approx(direct, rel=1e-12)
    assert c["in_combined_u"] == pytest.approx(1.0 / direct, rel=1e-12)
