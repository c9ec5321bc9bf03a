"""Plane-wave reflection off the ground at interior angles, against textbook cases.

The limits (perfect conductor, grazing incidence) are tested in test_antenna_mom.py;
here the values in between:

* normal incidence (ψ = 90°): both polarisations see Γ = (η2 − η1)/(η2 + η1) with
  η2 = η0/√εc, i.e. (1 − √εc)/(1 + √εc) for the horizontal field (Ramo, Whinnery & Van
  Duzer, *Fields and Waves in Communication Electronics*, normal incidence on a dielectric;
  Balanis, *Antenna Theory*, 3rd ed., §4.8; section numbers from memory). In Balanis's ground-reflection convention the vertical coefficient is
  referred to the opposite field component, so Rv = −Rh there;
* the Brewster angle of a lossless dielectric: Rv = 0 at the grazing angle with
  tan ψ = 1/√εr (θ_B = atan √εr from the normal; derived here: εr·sinψ = √(εr − cos²ψ)
  holds exactly at that angle);
* passivity: |R| ≤ 1 for any lossy ground at any angle (energy conservation).
"""

import math

import numpy as np
import pytest

from nullsteer.antenna.ground import complex_permittivity, fresnel


@pytest.mark.parametrize("eps", [13.0, 81.0 - 1j * 300.0, 5.0 - 1j * 2.0])
def test_normal_incidence(eps):
    rv, rh = fresnel(eps, math.pi / 2)
    want = (1 - np.sqrt(complex(eps))) / (1 + np.sqrt(complex(eps)))
    assert complex(rh) == pytest.approx(want, abs=1e-12)
    assert complex(rv) == pytest.approx(-want, abs=1e-12)


@pytest.mark.parametrize("eps_r", [4.0, 13.0, 20.0])
def test_brewster_angle_of_a_lossless_ground(eps_r):
    psi_b = math.atan(1.0 / math.sqrt(eps_r))
    rv, rh = fresnel(eps_r, psi_b)
    assert abs(complex(rv)) < 1e-12
    # the horizontal field has no Brewster angle: still reflected there (by hand:
    # (sinψ − √(ε − cos²ψ))/(sinψ + √(ε − cos²ψ)) with sinψ = 1/√(1+ε), cosψ = √ε/√(1+ε)
    # gives (1 − ε)/(1 + ε))
    assert complex(rh) == pytest.approx((1 - eps_r) / (1 + eps_r), abs=1e-12)
    # on either side of it the vertical coefficient changes sign (real for lossless)
    below, _ = fresnel(eps_r, 0.5 * psi_b)
    above, _ = fresnel(eps_r, 0.5 * (psi_b + math.pi / 2))
    assert complex(below).real < 0 < complex(above).real


def test_passive_for_every_angle():
    psi = np.radians(np.linspace(0.1, 90.0, 400))
    for er, sigma in [(13, 0.005), (5, 0.001), (81, 5.0), (20, 0.0303)]:
        for f in (1.8e6, 7e6, 30e6):
            rv, rh = fresnel(complex_permittivity(er, sigma, f), psi)
            assert np.all(np.abs(rv) <= 1 + 1e-12) and np.all(np.abs(rh) <= 1 + 1e-12)


def test_complex_permittivity_by_hand():
    # εc = εr − j·60·σ·λ (Balanis §4.8): average ground (13, 0.005 S/m) at 1.83 MHz,
    # λ = 163.82 m: 60·0.005·163.82 = 49.15
    eps = complex_permittivity(13.0, 0.005, 1.83e6)
    assert eps == pytest.approx(13.0 - 1j * 60 * 0.005 * 299_792_458.0 / 1.83e6, rel=1e-12)
    assert eps.imag == pytest.approx(-49.15, abs=0.01)
