"""Closed-loop mode table against python-control's feedback() and damp()."""

import control
import numpy as np
import pytest

from dampctl.analysis.modetable import TABLE_HEADERS, closed_loop_table
from dampctl.laws import dvf
from dampctl.testing import chain_plant, sdof_plant


def test_table_poles_are_python_controls_closed_loop_poles():
    plant = chain_plant([1.0, 0.5, 2.0], [1e4, 2e4, 1.5e4], damping=0.01)
    design = dvf.design(plant, ["p1", "p3"], gain=[30.0, 60.0], roll_off_hz=200.0, modes=[1, 2])
    table = closed_loop_table(plant, design, delay_s=0.0)
    loop = control.feedback(
        plant.statespace(design.actuators, design.sensors), design.statespace(), sign=-1
    )
    wn, zeta, _poles = control.damp(loop, doprint=False)
    ours = [complex(r.closed_freq_hz, r.closed_damping) for r in table.rows]
    # every row is one of python-control's poles (frequency and damping from damp())
    for value in ours:
        assert np.min(np.abs(wn / (2 * np.pi) - value.real) + np.abs(zeta - value.imag)) < 1e-8
    upper = np.concatenate(
        [
            [r.closed_freq_hz for r in table.rows],
            [abs(p) / (2 * np.pi) for p in table.controller_poles],
        ]
    )
    theirs = np.unique(np.round(wn / (2 * np.pi), 9))
    np.testing.assert_allclose(np.sort(upper), np.sort(theirs), rtol=1e-8)
    assert [r.target for r in table.rows] == [True, True, False]
    assert table.stable and table.target_min_damping() == min(
        r.closed_damping for r in table.rows[:2]
    )
    payload = table.to_dict()
    assert payload["modes"][0].keys() >= {
        "mode",
        "open_freq_hz",
        "open_damping",
        "closed_freq_hz",
        "closed_damping",
    }
    assert len(payload["controller_poles"]) == 2
    assert len(table.table_rows()[0]) == len(TABLE_HEADERS)
    assert "no loop delay" in table.loop_note


def test_delay_is_included_and_said():
    plant = chain_plant([1.0, 1.0], [1e4, 1e4], damping=0.01)
    design = dvf.design(plant, ["p1"], gain=50.0)
    table = closed_loop_table(plant, design, delay_s=1e-3)
    assert table.delay_s == 1e-3
    assert "1 ms" in table.loop_note and "Padé" in table.loop_note
    assert len(table.controller_poles) == 1  # a 2nd-order Padé: one complex pair
    ideal = closed_loop_table(plant, design, delay_s=0.0)
    assert table.rows[0].closed_damping != pytest.approx(ideal.rows[0].closed_damping)


def test_overdamped_mode_second_real_pole_is_listed_and_said():
    # m x'' + (c + g) x' + k x = 0 with g large: two real roots
    # s = (-(c+g) ± sqrt((c+g)^2 - 4 m k)) / (2 m) (quadratic formula)
    m, k, c, g = 1.0, 1e4, 2.0, 600.0
    plant = sdof_plant(m, k, c)
    design = dvf.design(plant, ["fv"], gain=g)
    table = closed_loop_table(plant, design, delay_s=0.0)
    disc = np.sqrt((c + g) ** 2 - 4 * m * k)
    roots = sorted([(-(c + g) + disc) / (2 * m), (-(c + g) - disc) / (2 * m)], key=abs)
    assert table.overdamped_modes == (1,)
    assigned = -2 * np.pi * table.rows[0].closed_freq_hz
    others = [p.real for p in table.controller_poles]
    assert sorted([assigned, *others], key=abs) == pytest.approx(roots, rel=1e-9)
    assert "second real pole of overdamped mode(s) 1" in table.other_poles_heading
    assert table.to_dict()["overdamped_modes"] == [1]


def test_delay_note_states_the_section_cascade():
    plant = chain_plant([1.0, 1.0], [1e4, 1e4], damping=0.01)
    design = dvf.design(plant, ["p1"], gain=50.0)
    table = closed_loop_table(plant, design, delay_s=5e-3)
    assert table.delay_sections >= 2
    assert f"{table.delay_sections} [2/2] Padé section(s)" in table.loop_note
    assert "order 2" not in table.loop_note
