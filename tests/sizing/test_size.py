"""Sizing: choice of pairs, rank rule, reported damping, cost and effort."""

import io
import json

import pytest
from sizingplants import shape_plant, stage_plant

from dampctl.analysis.closedloop import closed_loop_modes
from dampctl.commands.cli import main
from dampctl.errors import UsageError
from dampctl.laws import dvf
from dampctl.model.components import Requirements
from dampctl.model.plantfile import dump_plant
from dampctl.sizing.size import size_pairs


def _dominant_plant():
    # site "big" has the largest modal participation in every mode; each other site misses
    # one of the modes (a node of its shape there)
    shapes = {
        "big": [1.0, 0.9, 0.8],
        "m1": [0.5, 0.0, 0.2],
        "m2": [0.0, 0.6, -0.3],
        "m3": [0.2, -0.3, 0.0],
    }
    return shape_plant([12.0, 27.0, 51.0], shapes, costs={"big": 300.0})


def test_one_pair_picks_the_candidate_with_largest_participation_everywhere():
    result = size_pairs(_dominant_plant(), max_pairs=1)
    assert result.rows[0].chosen == ("pbig",)
    assert result.rows[0].method == "exhaustive"


def test_row_damping_equals_the_laws_design_for_that_set():
    plant = _dominant_plant()
    result = size_pairs(plant, max_pairs=2, target_damping=0.05)
    for row in result.rows:
        design = dvf.design(plant, list(row.chosen), modes=[1, 2, 3], target_damping=0.05)
        modes = closed_loop_modes(plant, design)
        assert row.min_damping == pytest.approx(modes.damping.min(), rel=1e-12)
        assert row.min_damping == pytest.approx(min(z for _m, z in row.mode_damping))
        maximized = dvf.design(plant, list(row.chosen), modes=[1, 2, 3], target_damping=None)
        value = closed_loop_modes(plant, maximized).damping.min()
        assert row.achievable_min_damping == pytest.approx(value, rel=1e-12)
    assert result.recommended == 1 and result.rows[0].target_met


def test_row_damping_equals_cli_tune(tmp_path):
    # `dampctl tune` on the chosen set reports the same smallest damping as the sizing row
    # (the `assess` command is not on this branch; its closed-loop modes come from the same
    # closed_loop_modes call, checked above).
    plant = _dominant_plant()
    path = tmp_path / "plant.toml"
    path.write_text(dump_plant(plant))
    result = size_pairs(plant, max_pairs=2, target_damping=0.05)
    row = result.rows[1]
    out = io.StringIO()
    code = main(
        ["tune", str(path), "--law", "dvf", "--pairs", ",".join(row.chosen), "--modes", "1-3",
         "--target-damping", "0.05", "-o", str(tmp_path / "d.json"), "--json"],
        stdout=out, stderr=io.StringIO(),
    )  # fmt: skip
    assert code == 0
    payload = json.loads(out.getvalue())
    tuned = min(m["closed_damping"] for m in payload["modes"] if m["mode"] in (1, 2, 3))
    assert row.min_damping == pytest.approx(tuned, rel=1e-9)


def test_symmetric_stage_is_never_recommended_one_pair():
    # Two modes at one frequency need two pairs whose shapes span them (PBH rank test,
    # Hautus 1969): one pair leaves a combination of x and y undamped.
    plant = stage_plant(requirements=Requirements(min_damping=0.005))
    result = size_pairs(plant, max_pairs=2)
    one = result.rows[0]
    assert one.shortfall and one.shortfall[0]["modes"] == [1, 2]
    assert not one.acceptable
    assert result.recommended == 2
    assert not result.rows[1].shortfall
    assert result.clusters[0]["modes"] == [1, 2]
    assert "never recommended" in result.rank_rule


def test_no_count_reaches_an_impossible_target():
    result = size_pairs(_dominant_plant(), max_pairs=2, target_damping=0.95)
    assert result.recommended is None
    assert result.limiting_mode in (1, 2, 3)
    assert "no set of up to 2 pair(s)" in result.statement


def test_cost_and_damping_per_cost():
    plant = _dominant_plant()
    result = size_pairs(plant, max_pairs=2)
    first, second = result.rows
    assert first.cost == pytest.approx(300.0 + 50.0)
    costs = {"pbig": 350.0, "pm1": 150.0, "pm2": 150.0, "pm3": 150.0}
    assert second.cost == pytest.approx(sum(costs[p] for p in second.chosen))
    expected = (second.achievable_min_damping - first.achievable_min_damping) / (
        second.cost - first.cost
    )
    assert second.damping_per_cost == pytest.approx(expected)
    assert first.damping_per_cost is None


def test_greedy_rows_when_the_exhaustive_limit_is_small():
    result = size_pairs(_dominant_plant(), max_pairs=2, exhaustive_limit=3)
    assert result.rows[0].method == "exhaustive"
    assert result.rows[1].method == "greedy + swaps"
    full = size_pairs(_dominant_plant(), max_pairs=2)
    assert result.rows[1].achievable_min_damping <= full.rows[1].achievable_min_damping + 1e-9


def test_no_disturbance_gives_no_effort():
    result = size_pairs(_dominant_plant(), max_pairs=1)
    assert result.rows[0].effort_rms is None
    assert result.to_dict()["rows"][0]["effort_rms"] is None


def test_margin_requirement_blocks_a_recommendation():
    # with a loop delay the DVF loop has a finite gain margin; the law's tuning holds the
    # required 60 dB (issue 19), so the gain stays small and the target is missed
    plant = _dominant_plant()
    strict = type(plant)(
        modes=plant.modes, sites=plant.sites, actuators=plant.actuators, sensors=plant.sensors,
        pairs=plant.pairs,
        requirements=Requirements(loop_delay_s=2e-3, min_gain_margin_db=60.0),
    )  # fmt: skip
    result = size_pairs(strict, max_pairs=1, target_damping=0.02)
    row = result.rows[0]
    assert min(m["gain_margin_db"] for m in row.margins) >= 60.0 - 0.05
    assert row.margins_met and not row.target_met
    assert result.recommended is None
    assert "against the target 0.02" in result.statement


def test_json_has_the_issue_keys():
    data = size_pairs(_dominant_plant(), max_pairs=2).to_dict()
    assert {"law", "target_damping", "rows", "recommended", "clusters", "rank_rule"} <= set(data)
    for row in data["rows"]:
        assert {"pairs_used", "chosen", "min_damping", "cost", "method"} <= set(row)
    json.dumps(data)


def test_bad_options_are_refused():
    plant = _dominant_plant()
    with pytest.raises(UsageError, match="law must be one of"):
        size_pairs(plant, law="lqg")
    with pytest.raises(UsageError, match="max pairs must be in"):
        size_pairs(plant, max_pairs=9)
    with pytest.raises(UsageError, match="mode 7 does not exist"):
        size_pairs(plant, modes=[7])
    with pytest.raises(UsageError, match="target damping must be in"):
        size_pairs(plant, target_damping=1.5)


def test_pairs_a_law_cannot_use_are_excluded_with_the_reason():
    from dampctl.model.components import Pair
    from dampctl.testing import chain_plant

    base = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    plant = type(base)(
        modes=base.modes, sites=base.sites, actuators=base.actuators, sensors=base.sensors,
        pairs=[*base.pairs, Pair("cross", "f1", "v2")],
    )  # fmt: skip
    result = size_pairs(plant, law="dvf", max_pairs=1, candidates=["p1", "p2", "cross"])
    reasons = dict(result.excluded)
    assert set(reasons) == {"cross"} and "collocated" in reasons["cross"]
    with pytest.raises(UsageError, match="no candidate pair suits iff") as refused:
        size_pairs(plant, law="iff", max_pairs=1)
    # pairs refused for the same reason are named together, the reason said once
    assert "(likewise p2" in str(refused.value)
    assert str(refused.value).count("IFF needs an active strut") == 2  # velocity, displacement


def test_rows_stop_where_every_larger_set_would_share_hardware():
    # p1 (velocity) and q1 (displacement) share actuator f1: no 2-set of them exists
    from dampctl.testing import chain_plant

    plant = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    result = size_pairs(plant, max_pairs=2, candidates=["p1", "q1"])
    assert [r.pairs_used for r in result.rows] == [1]


def test_equal_damping_prefers_the_cheaper_set():
    # ties within 1e-6 (two eigen-solves of the same loop) go to the lower cost; spanning the
    # clusters and a real damping gain come first
    from dampctl.sizing.size import _better_set

    assert _better_set((True, 0.2523, 3800.0, (0, 1)), (True, 0.2523 * (1 + 1e-12), 4400.0, (0, 2)))
    assert not _better_set(
        (True, 0.2523 * (1 + 1e-12), 4400.0, (0, 1)), (True, 0.2523, 3800.0, (0, 2))
    )
    assert _better_set((True, 0.26, 4400.0, (1, 2)), (True, 0.2523, 3800.0, (0, 1)))
    assert _better_set((True, 0.01, 9e9, (1, 2)), (False, 0.3, 1.0, (0, 1)))
    # equal damping (to the last bits) and cost: the set first in the plant file, both ways
    assert _better_set((True, 0.2523, 1900.0, (0, 2)), (True, 0.2523 * (1 - 1e-15), 1900.0, (1, 3)))
    assert not _better_set(
        (True, 0.2523 * (1 - 1e-15), 1900.0, (1, 3)), (True, 0.2523, 1900.0, (0, 2))
    )


def test_a_symmetric_tie_goes_to_the_first_pairs_in_the_file():
    # the stage's x coils (vx1, vx2) and y coils (vy1, vy2) are mirror images: every set of one
    # x and one y pair reaches the same damping, and the recommendation must not depend on the
    # last bits of the eigenvalues (it did: vx1,vy2 on one machine, vx2,vy2 on another)
    from dataclasses import replace

    from repo import PLANTS

    from dampctl.model.plantfile import load_plant

    plant = load_plant(PLANTS / "scanning_stage.toml")
    plant = replace(plant, pairs=tuple(p for p in plant.pairs if p.name.startswith("v")))
    result = size_pairs(plant, max_pairs=2)
    assert result.rows[1].chosen == ("vx1", "vy1")
