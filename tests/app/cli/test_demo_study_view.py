"""``upstroke demo --study``: the invented demo study analysed into a results file that opens as a study."""

from __future__ import annotations

import pytest

pytest.importorskip("pytestqt")

from analysis.results import read_study
from app import demo_study
from app.cli import build_parser
from app.cli.demo import demo_study_results


def test_the_option_is_parsed():
    args = build_parser().parse_args(["demo", "--study", "--screenshot", "x.png"])
    assert args.study and args.screenshot == "x.png"


@pytest.mark.slow
def test_the_demo_study_opens_as_a_grid_of_its_cells_and_conditions(qtbot, tmp_path):
    from app.gui.window.main_window import MainWindow

    results = demo_study_results(tmp_path)
    layout = read_study(results)
    assert layout.conditions == demo_study.CONDITIONS
    assert demo_study_results(tmp_path) == results  # analysed once, then reopened as left
    w = MainWindow(interactive=False)
    qtbot.addWidget(w)
    w.resize(1366, 768)
    w.show()
    w.open_results(str(results))
    assert w.settle(180_000)
    model = w.study.panel.grid.grid_model
    assert model.cells == [c.cell for c in demo_study.CELLS] and model.conditions == list(demo_study.CONDITIONS)
    assert len(model.entries_in_order()) == 15 and all(e.n_used > 0 for e in model.entries_in_order())
    # The scenario's construction (app/demo_study.py): UP-113 flattens phase 4, so every cell slows.
    w.study.comparison.redraw()
    rates = w.study.comparison.figure.drawn["rate_bpm"]["cells"]
    assert all(v[1] < v[0] for v in rates.values())
