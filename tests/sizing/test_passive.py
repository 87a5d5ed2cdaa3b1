"""Sizing passive parts: absorber mass ratios and the number of shunted struts."""

import numpy as np
import pytest

from dampctl.errors import UsageError
from dampctl.laws import tmd
from dampctl.model.components import (
    Actuator,
    Disturbance,
    Mode,
    Output,
    Pair,
    PartPrice,
    Requirements,
    Sensor,
)
from dampctl.model.plant import ModalPlant
from dampctl.sizing.passive import size_absorbers, size_shunts


def sdof(min_damping=0.06):
    return ModalPlant(
        modes=[Mode(40.0, 0.005, modal_mass_kg=3.0)],
        sites={"x": [1.0], "g": [0.0]},
        outputs=[Output("xo", "displacement", site="x")],
        disturbances=[Disturbance("f", "x", 1.0)],
        requirements=Requirements(modes=(1,), min_damping=min_damping),
        parts=(PartPrice("absorber", "absorber", 10.0, 100.0),),
    )


def test_absorber_mass_ratios():
    plant = sdof()
    result = size_absorbers(plant, mass_ratios=[0.1, 0.01, 0.03])
    assert [r.size for r in result.rows] == [0.01, 0.03, 0.1]
    dampings = [r.min_damping for r in result.rows]
    assert dampings == sorted(dampings)  # more mass, more damping
    for r in result.rows:  # each row is the law's own design
        design = tmd.design(plant, modes=[1], mass_ratio=r.size)
        assert r.min_damping == pytest.approx(design.info["min_damping"], rel=1e-12)
        assert r.cost == pytest.approx(10.0 + 100.0 * design.parts[0].mass_kg)
        assert r.target_met == (r.min_damping >= 0.06)
    first = next(k for k, r in enumerate(result.rows) if r.target_met)
    assert result.recommended == first and "reaches damping" in result.statement
    none = size_absorbers(sdof(0.5), mass_ratios=[0.01])
    assert none.recommended is None and "no mass ratio" in none.statement


def strut_plant():
    # two piezo struts on one mode, the second twice as stiff a share: K² ∝ k_s (same coupling)
    def strut(name, ks):
        return Actuator(name, "strut", between=("g", "x"), stiffness_n_per_m=ks,
                        capacitance_f=1e-6, coupling_k=0.5, cost=100.0)

    return ModalPlant(
        modes=[Mode(80.0, 0.002, modal_mass_kg=1.0)],
        sites={"x": [1.0], "g": [0.0]},
        actuators=[strut("s1", 2e4), strut("s2", 4e4)],
        sensors=[Sensor("F1", "force", actuator="s1"), Sensor("F2", "force", actuator="s2")],
        pairs=[Pair("p1", "s1", "F1"), Pair("p2", "s2", "F2")],
        outputs=[Output("xo", "displacement", site="x")],
        disturbances=[Disturbance("f", "x", 1.0)],
        requirements=Requirements(modes=(1,), min_damping=0.02),
        parts=(PartPrice("r", "r_shunt", 5.0),),
    )


def test_shunted_struts():
    plant = strut_plant()
    result = size_shunts(plant, kind="R")
    assert [r.size for r in result.rows] == [1.0, 2.0]
    assert result.rows[0].chosen == ("p2",)  # the stiffer strut couples more
    assert result.rows[1].min_damping > result.rows[0].min_damping
    assert result.rows[0].cost == pytest.approx(100.0 + 5.0)
    assert np.isfinite(result.rows[1].peak_ratio)
    with pytest.raises(UsageError, match="no pair on a piezoelectric strut"):
        size_shunts(sdof())


def test_size_command_for_passive_laws(tmp_path):
    import io
    import json

    from dampctl.commands.cli import main
    from dampctl.model.plantfile import dump_plant

    path = tmp_path / "p.toml"
    path.write_text(dump_plant(sdof()))
    out, err = io.StringIO(), io.StringIO()
    code = main(["size", str(path), "--law", "tmd", "--mass-ratios", "0.02,0.1", "--json"],
                stdout=out, stderr=err)
    assert code in (0, 1), err.getvalue()
    data = json.loads(out.getvalue())
    assert data["format"] == "dampctl-sizing-passive" and len(data["rows"]) == 2
    out, err = io.StringIO(), io.StringIO()
    assert main(["size", str(path), "--law", "dvf", "--mass-ratios", "0.1"], stdout=out,
                stderr=err) == 2
