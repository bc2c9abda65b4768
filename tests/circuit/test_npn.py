"""Transistor model: thermal voltage, junction drop, temperature law, hybrid-π."""

from __future__ import annotations

import math

import pytest
from scipy import constants

from ringwise.circuit.npn import (
    T_NOMINAL,
    hybrid_pi,
    junction_state,
    saturation_current,
    thermal_voltage,
)


def test_thermal_voltage_at_300K_from_codata() -> None:
    # CODATA 2018 exact k and e (scipy.constants): k·300/q = 25.852 mV.
    assert thermal_voltage(300.0) == pytest.approx(1.380649e-23 * 300 / 1.602176634e-19, rel=1e-12)
    assert thermal_voltage(300.0) == pytest.approx(25.852e-3, abs=1e-6)


def test_thermal_voltage_about_26_mV_at_room_temperature() -> None:
    # "About 26 mV at room temperature": common practice, no source.
    for celsius in (20.0, 25.0, 30.0):
        assert 25e-3 < thermal_voltage(constants.zero_Celsius + celsius) < 27e-3


@pytest.mark.parametrize("IS", [1e-15, 1e-14, 5e-14])
def test_silicon_junction_drop_near_1mA(IS: float) -> None:
    # A small silicon transistor at about 1 mA drops roughly 0.6-0.7 V base-emitter
    # (bench reading a little below 0.7 V): common practice, no source.
    VT = thermal_voltage(T_NOMINAL)
    vbe = VT * math.log(1e-3 / IS + 1.0)
    st = junction_state(vbe, 5.0, IS, 200.0, 1.0, 1e12, VT)
    assert pytest.approx(1e-3, rel=1e-6) == st.IC
    assert 0.58 < vbe < 0.72


def test_vbe_falls_about_2mV_per_kelvin() -> None:
    # About -2 mV/°C at constant current: common practice, no source.
    def vbe_at(celsius: float) -> float:
        T = constants.zero_Celsius + celsius
        return thermal_voltage(T) * math.log(1e-3 / saturation_current(1e-14, T))

    slope = (vbe_at(35.0) - vbe_at(15.0)) / 20.0
    assert -2.5e-3 < slope < -1.6e-3


def test_hybrid_pi_forward_active() -> None:
    # gm = IC/VT, r_pi = β/gm, r_o = (VA + VCE)/IC in the forward-active transport
    # model (Sedra & Smith, Microelectronic Circuits, BJT chapter, from memory).
    VT, IS, beta, VA, VCE = 0.025852, 1e-14, 150.0, 80.0, 4.0
    vbe = 0.65
    st = junction_state(vbe, VCE, IS, beta, 1.0, VA, VT)
    hp = hybrid_pi(st, 300e6, 2e-12)
    assert hp.gm == pytest.approx(st.IC / VT, rel=1e-6)
    assert hp.r_pi == pytest.approx(beta / hp.gm * (1 + VCE / VA), rel=1e-6)
    assert hp.r_o == pytest.approx((VA + VCE) / st.IC, rel=1e-6)
    # fT = gm / (2π (C_pi + C_mu))
    assert hp.gm / (2 * math.pi * (hp.C_pi + hp.C_mu)) == pytest.approx(300e6, rel=1e-12)


def test_c_pi_never_negative() -> None:
    st = junction_state(0.45, 3.0, 1e-14, 100.0, 1.0, 50.0, 0.02585)
    assert hybrid_pi(st, 1e9, 5e-12).C_pi == 0.0


def test_saturation_is_visible() -> None:
    # With the base-collector junction forward biased the forced gain IC/IB falls
    # far below β (Sedra & Smith, BJT saturation, from memory).
    VT, beta = 0.02585, 200.0
    active = junction_state(0.68, 2.0, 1e-14, beta, 1.0, 100.0, VT)
    saturated = junction_state(0.68, 0.05, 1e-14, beta, 1.0, 100.0, VT)
    assert pytest.approx(beta * (1 + 2.0 / 100.0), rel=1e-6) == active.IC / active.IB
    assert beta / 10 > saturated.IC / saturated.IB
    assert saturated.I_R > 0.01 * saturated.I_F
