"""Gas data (config/gases.yaml via knudsweep.solver.gas) against independent references."""

import pytest

from knudsweep.solver.gas import get_gas, known_gases, vhs_reference_viscosity, viscosity

# CRC Handbook of Chemistry and Physics, "Viscosity of Gases" (M. L. Huber,
# A. H. Harvey), values at 300 K in micro-pascal seconds (check-values.md
# section 4.2(b), tagged [confirmed]).
CRC_300K_UPA_S = {
    "He": 19.9,
    "Ne": 31.9,
    "Ar": 22.7,
    "Kr": 25.5,
    "Xe": 23.2,
    "H2": 8.9,
    "N2": 17.9,
    "O2": 20.7,
    "CO2": 15.0,
    "CH4": 11.1,
    "air": 18.5,
}

# 2 %: the power law mu_ref (T/273)^omega is a two-parameter fit (Bird 1994,
# eq. 4.62); over 250-500 K its deviation from the real viscosity is of order
# 1-2 % (Bird 1994, Ch. 4, discussion of the VHS omega), and the CRC values
# carry ~0.5 % uncertainty themselves.
VISCOSITY_RTOL = 0.02


def test_every_gas_has_a_crc_reference():
    assert set(known_gases()) == set(CRC_300K_UPA_S)


@pytest.mark.parametrize("gas", sorted(CRC_300K_UPA_S))
def test_viscosity_at_300K_matches_crc(gas):
    assert viscosity(gas, 300.0) == pytest.approx(CRC_300K_UPA_S[gas] * 1e-6, rel=VISCOSITY_RTOL)


@pytest.mark.parametrize("gas,fluid", [("Ar", "Argon"), ("N2", "Nitrogen"), ("He", "Helium")])
@pytest.mark.parametrize("temperature", [250.0, 300.0, 350.0, 400.0, 450.0, 500.0])
def test_viscosity_matches_coolprop(gas, fluid, temperature):
    # CoolProp (Bell et al., Ind. Eng. Chem. Res. 53 (2014) 2498) reference
    # correlations at 1 kPa, i.e. the dilute-gas limit the solver assumes.
    CP = pytest.importorskip("CoolProp.CoolProp")
    reference = CP.PropsSI("V", "T", temperature, "P", 1000.0, fluid)
    assert viscosity(gas, temperature) == pytest.approx(reference, rel=VISCOSITY_RTOL)


# 0.5 %: d_vhs is tabulated to 3 significant digits, mu ~ 1/d^2, so rounding d
# alone moves mu by up to 2 x 0.005/2.33 = 0.43 % (He, the smallest d).
VHS_RTOL = 0.005


@pytest.mark.parametrize(
    "gas",
    [
        pytest.param(
            g,
            marks=pytest.mark.xfail(
                reason="H2 row: d_vhs=2.92 gives mu_ref 0.59 % high (2.911 would match); check Bird 1994 Table A1",
                strict=True,
            ),
        )
        if g == "H2"
        else g
        for g in sorted(CRC_300K_UPA_S)
    ],
)
def test_vhs_diameter_is_consistent_with_reference_viscosity(gas):
    # Bird (1994) eq. 4.62: mu_ref from m, d_vhs, omega must reproduce the tabulated mu_ref.
    assert vhs_reference_viscosity(gas) == pytest.approx(get_gas(gas).mu_ref, rel=VHS_RTOL)
