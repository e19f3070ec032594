"""Copper rules: IPC-2221 conductor sizing and the [copper] table of project.toml."""

import math

import pytest

from pipeline.errors import ProjectError
from pipeline.project import load_project
from pipeline.route.rules import CopperRules, layer_names, width_for_current


def test_ipc2221_worked_example_1A_10C_outer_1oz():
    # Worked by hand from the IPC-2221B chart relation I = k dT^0.44 A^0.725
    # (REFERENCES.md section 9; k = 0.048 outer, constants from memory):
    #   10^0.44 = 2.7542; 0.048 x 2.7542 = 0.13220; 1 / 0.13220 = 7.5642
    #   A = 7.5642^(1/0.725) = exp(1.37931 x ln 7.5642) = exp(1.37931 x 2.02342) = exp(2.79093) = 16.294 mil^2
    #   width = 16.294 / 1.378 mil = 11.824 mil = 0.3003 mm  (REFERENCES.md: "about 0.30 mm")
    assert width_for_current(1.0, rise_c=10, copper_oz=1, outer=True) == pytest.approx(0.3003, abs=0.0005)


def test_ipc2221_inner_layers_need_more_copper():
    # Same relation with k = 0.024 (inner): A grows by 2^(1/0.725) = 2.5995 (closed form).
    outer = width_for_current(2.0, outer=True)
    inner = width_for_current(2.0, outer=False)
    assert inner / outer == pytest.approx(2 ** (1 / 0.725), rel=1e-9)


@pytest.mark.parametrize("oz", [0.5, 1.0, 2.0])
def test_ipc2221_width_inverse_in_copper_weight(oz):
    # Closed form: the cross-section is fixed by I and dT, so width x thickness is constant.
    assert width_for_current(1.5, copper_oz=oz) * oz == pytest.approx(width_for_current(1.5, copper_oz=1.0))


def test_net_width_takes_the_wider_of_rule_and_current():
    r = CopperRules(currents=(("VBAT", 1.0), ("SIG", 0.01)))
    assert r.net_width("VBAT") == pytest.approx(0.3003, abs=0.0005)  # the worked example above
    assert r.net_width("SIG") == 0.2      # a tiny current keeps the rule's width
    assert r.net_width("OTHER") == 0.2


def test_defaults_are_the_common_practice_figures():
    # REFERENCES.md section 4 (common practice): 0.2 / 0.2 conservative, copper to edge 0.25 outer,
    # 0.4 inner; via 0.6 / 0.3 (common practice, from memory) leaves a 0.15 mm annular ring.
    r = CopperRules()
    assert (r.track_width_mm, r.clearance_mm, r.edge_clearance_mm, r.inner_edge_clearance_mm) == (0.2, 0.2, 0.25, 0.4)
    assert r.annular_ring_mm == pytest.approx(0.15)
    assert r.vias_in_pads is False
    assert math.isclose(r.pitch_mm, 0.4)
    assert layer_names(1) == ("top",) and layer_names(2) == ("top", "bottom")


def _project(tmp_path, body, layers=2):
    (tmp_path / "project.toml").write_text(
        f'[project]\ndesign = "d.toml"\n[board]\nlayers = {layers}\n' + body)
    return tmp_path


def test_copper_table_is_read(tmp_path):
    p = load_project(_project(tmp_path, '[copper]\ntrack_width_mm = 0.15\nclearance_mm = 0.15\n'
                                        'areas = { GND = "inner1" }\ncurrents = { VBAT = 1.5 }\n'
                                        'vias_in_pads = true\n', layers=4))
    c = p.copper
    assert (c.track_width_mm, c.clearance_mm, c.layers, c.vias_in_pads) == (0.15, 0.15, 4, True)
    assert c.areas == (("GND", "inner1"),) and c.currents == (("VBAT", 1.5),)
    assert c.area_layer("GND") == "inner1"


@pytest.mark.parametrize("body, key, line", [
    ('[copper]\ntrack_width_mm = -1\n', "copper.track_width_mm", 6),
    ('[copper]\nvias_in_pads = "no"\n', "copper.vias_in_pads", 6),
    ('[copper]\nareas = { GND = "middle" }\n', "copper.areas.GND", 6),
    ('[copper]\ncurrents = { VBAT = 0 }\n', "copper.currents.VBAT", 6),
    ('[copper]\nvia_drill_mm = 0.7\n', "copper.via_drill_mm", 6),
    ('[copper]\nareas = { GND = "bottom", VCC = "bottom" }\n', "copper.areas", 6),
    ('[copper]\nwidth = 1\n', "copper.width", 6),
])
def test_bad_copper_values_name_key_and_line(tmp_path, body, key, line):
    with pytest.raises(ProjectError) as e:
        load_project(_project(tmp_path, body))
    assert key in str(e.value) and "project.toml" in str(e.value)
    assert f"project.toml:{line}:" in str(e.value)


def test_routing_needs_1_2_or_4_layers_unless_off(tmp_path):
    with pytest.raises(ProjectError, match="board.layers"):
        load_project(_project(tmp_path, "", layers=6))
    (tmp_path / "project.toml").unlink()
    p = load_project(_project(tmp_path, "[copper]\nroute = false\n", layers=6))
    assert p.copper.route is False
