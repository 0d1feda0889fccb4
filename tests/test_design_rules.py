"""Rules of the design schema that the model builder relies on (validation once, at the
boundary): each bad input is refused by the schema with the field and the allowed values."""

from __future__ import annotations

import pytest

from femcore.foundation.design import DesignError, demo_design, design_from_dict


def _demo_dict() -> dict:
    return demo_design().model_dump()


def _problems(data: dict) -> list[str]:
    with pytest.raises(DesignError) as exc:
        design_from_dict(data)
    return exc.value.problems


def test_renamed_key_says_its_new_name():
    data = _demo_dict()
    data["piles"]["interface_factor"] = data["piles"].pop("slip_stiffening")
    assert _problems(data) == ["piles.interface_factor: renamed to piles.slip_stiffening "
                               "(same meaning and range)"]


def test_axisymmetric_needs_the_continuum():
    data = _demo_dict()
    data["analysis"].update(geometry="axisymmetric", support="springs")
    data["loading"]["control"] = "settlement"
    assert any("analysis.support must be 'continuum'" in p for p in _problems(data))


def test_one_soil_depth_rule():
    """The model depth is the deeper of the pile tips + one cap diameter and two cap
    diameters (demo: tips at 3.0 + 21.5 / sqrt(1 + 1/36) = 24.21 m, + 22 m = 46.21 m > 44 m);
    layers shallower than that are refused with both numbers."""
    d = demo_design()
    assert d.model_depth == pytest.approx(3.0 + 21.5 / (1 + 1 / 36) ** 0.5 + 22.0, rel=1e-12)
    data = _demo_dict()
    data["soil"]["layers"][-1]["thickness"] = 29.0  # total 16.5 + 29 = 45.5 m < 46.21 m
    msg = [p for p in _problems(data) if p.startswith("soil.layers")]
    assert len(msg) == 1 and "45.50 m" in msg[0] and "46.21 m" in msg[0]
    # one problem, one line: its advice after the semicolon stays with it
    assert msg[0].endswith("; thicken the last layer")
    assert not [p for p in _problems(data) if p.startswith(("design:", "thicken"))]
