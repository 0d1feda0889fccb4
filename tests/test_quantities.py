"""Material quantities of a design (cap and pedestal concrete, piles), checked against hand
calculations of the demo (an invented design): the cap as a solid of revolution decomposed
into a cylinder, an annulus and a cone frustum (elementary geometry), the piles as counts
times lengths along their axes."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from femcore.foundation.design import DesignError, UnitRates, demo_design, load_design
from femcore.foundation.quantities import QUANTITY_UNITS, quantities, revolved_volume

DEMO = Path(__file__).resolve().parents[1] / "examples" / "fennwick_fw07.toml"


def _cap_by_hand(R, rp, t_e, t_c):
    """Cylinder r < rp of height t_c + annulus rp < r < R of height t_e + the sloping top
    above the edge height: 2 pi int_rp^R r (t_c - t_e)(R - r)/(R - rp) dr."""
    inner = math.pi * rp**2 * t_c
    annulus = math.pi * (R**2 - rp**2) * t_e
    slope = 2 * math.pi * (t_c - t_e) / (R - rp) * (R * (R**2 - rp**2) / 2 - (R**3 - rp**3) / 3)
    return inner + annulus + slope


def test_demo_cap_and_piles_by_hand():
    d = demo_design()
    q = quantities(d)
    cap = d.cap
    assert (cap.diameter, cap.pedestal_diameter, cap.edge_thickness, cap.centre_thickness) \
        == (22.0, 6.4, 1.2, 3.0)
    # 96.51 + 417.55 + 255.83 = 769.89 m3 (worked by hand from the demo's dimensions)
    assert q["cap_concrete_volume"] == pytest.approx(769.89, abs=0.01)
    assert q["cap_concrete_volume"] == pytest.approx(_cap_by_hand(11.0, 3.2, 1.2, 3.0),
                                                     rel=1e-12)
    assert q["pedestal_concrete_volume"] == 0.0  # the demo's pedestal has no height
    assert q["pile_count"] == 28 + 16
    # raked piles: the length is along the axis (a 1:6 rake does not shorten it)
    assert q["pile_total_length"] == pytest.approx(44 * 21.5, rel=1e-12)
    assert q["pile_concrete_volume"] == pytest.approx(44 * 21.5 * 0.45**2, rel=1e-12)
    assert q["cost_index"] is None
    assert set(q) == set(QUANTITY_UNITS)


def test_pedestal_circular_piles_and_cost_index():
    d = demo_design()
    d = d.model_copy(update={
        "cap": d.cap.model_copy(update={"pedestal_height": 0.8, "diameter": 18.0,
                                        "edge_thickness": 3.0}),  # a flat cap: a cylinder
        "piles": d.piles.model_copy(update={"shape": "circular", "width": 0.6}),
        "unit_rates": UnitRates(concrete=200.0, pile_metre=50.0, pile_concrete=100.0,
                                pile_each=1000.0)})
    q = quantities(d)
    assert q["cap_concrete_volume"] == pytest.approx(math.pi * 9.0**2 * 3.0, rel=1e-12)
    assert q["pedestal_concrete_volume"] == pytest.approx(math.pi * 3.2**2 * 0.8, rel=1e-12)
    pile_v = 44 * 21.5 * math.pi * 0.3**2
    assert q["pile_concrete_volume"] == pytest.approx(pile_v, rel=1e-12)
    assert q["cost_index"] == pytest.approx(
        200.0 * (q["cap_concrete_volume"] + q["pedestal_concrete_volume"])
        + 50.0 * 44 * 21.5 + 100.0 * pile_v + 1000.0 * 44, rel=1e-12)


def test_revolved_volume_of_a_rectangle_and_a_triangle():
    # a washer (r 1..2, height 1): pi (4 - 1); a cone (radius 1, height 1): pi / 3
    assert revolved_volume([1, 2, 2, 1], [0, 0, 1, 1]) == pytest.approx(3 * math.pi)
    assert revolved_volume([0, 1, 0], [0, 0, 1]) == pytest.approx(math.pi / 3)
    # orientation does not matter
    assert revolved_volume([0, 0, 1], [0, 1, 0]) == pytest.approx(math.pi / 3)


def test_the_demo_file_is_the_demo_design():
    assert quantities(load_design(DEMO)) == quantities(demo_design())


def test_unit_rates_are_checked(tmp_path):
    text = DEMO.read_text(encoding="utf-8") + "\n[unit_rates]\nconcrete = -5.0\n"
    p = tmp_path / "bad.toml"
    p.write_text(text, encoding="utf-8")
    with pytest.raises(DesignError) as exc:
        load_design(p)
    assert any("unit_rates.concrete" in m and "-5" in m for m in exc.value.problems)
