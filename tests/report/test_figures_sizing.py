"""Sizing figures: plot functions draw on given axes and return their artists."""

from matplotlib.figure import Figure
from sizingplants import shape_plant

from dampctl.report.figures_sizing import plot_damping_and_cost, plot_mode_damping, sizing_pngs
from dampctl.sizing.size import size_pairs


def _result():
    plant = shape_plant([12.0, 27.0], {"a": [1.0, 0.8], "b": [0.3, -0.9]})
    return size_pairs(plant, max_pairs=2, target_damping=0.03)


def test_plots_use_the_given_axes_and_return_artists():
    result = _result()
    ax = Figure().add_subplot()
    drawn = plot_damping_and_cost(result, ax=ax)
    assert drawn["axes"][0] is ax and len(drawn["lines"]) == 3
    assert list(drawn["lines"][0].get_ydata()) == [r.min_damping for r in result.rows]
    assert drawn["target"].get_ydata()[0] == 0.03
    bars = plot_mode_damping(result)
    assert len(bars["bars"]) == 2 and len(bars["bars"][0]) == 2
    assert bars["bars"][1][0].get_height() == result.rows[1].mode_damping[0][1]
    pngs = sizing_pngs(result)
    assert all(data[:4] == b"\x89PNG" for data in pngs.values())


def test_damping_and_cost_axes_start_at_zero_with_headroom():
    result = _result()
    drawn = plot_damping_and_cost(result)
    damping_ax, cost_ax = drawn["axes"][:2]
    assert damping_ax.get_ylim()[0] == 0.0 and cost_ax.get_ylim()[0] == 0.0
    top = max(r.achievable_min_damping for r in result.rows)
    assert damping_ax.get_ylim()[1] > top
    assert cost_ax.get_ylim()[1] > max(r.cost for r in result.rows)
