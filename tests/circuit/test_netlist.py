"""The netlist: unique names, nodes in order, copies with changed values."""

from __future__ import annotations

import pytest

from ringwise.circuit.netlist import (
    GROUND,
    NPN,
    Capacitor,
    DCSupply,
    Inductor,
    Netlist,
    NPNParams,
    Resistor,
    terminals,
)

PARAMS = NPNParams(IS=1e-14, beta=100.0, beta_R=1.0, VA=50.0, VT=0.0258, fT=1e8, C_mu=1e-12)


def _net() -> Netlist:
    return Netlist(
        (
            DCSupply("V", "vcc", 9.0),
            Resistor("R1", "vcc", "b", 10e3),
            Capacitor("C1", "b", GROUND, 1e-9),
            Inductor("L", "vcc", "c", 1e-6, 0.5),
            NPN("Q", "c", "b", "e", PARAMS),
        )
    )


def test_names_must_be_unique() -> None:
    with pytest.raises(ValueError, match="two elements are named 'R1'"):
        Netlist((Resistor("R1", "a", "b", 1.0), Resistor("R1", "b", GROUND, 1.0)))


def test_nodes_in_order_of_first_appearance_without_ground() -> None:
    assert _net().nodes == ["vcc", "b", "c", "e"]


def test_lookup_membership_and_kinds() -> None:
    net = _net()
    assert net["L"].L == 1e-6
    assert "Q" in net and "nothing" not in net
    assert [el.name for el in net.of_kind(Resistor)] == ["R1"]
    assert terminals(net["Q"]) == ("c", "b", "e")
    assert terminals(net["V"]) == ("vcc", GROUND)


def test_replace_makes_a_changed_copy() -> None:
    net = _net()
    other = net.replace("R1", R=22e3)
    assert other["R1"].R == 22e3
    assert net["R1"].R == 10e3
    assert other["L"] is net["L"]
