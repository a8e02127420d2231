"""The figures draw from the engine's dictionaries, whatever the data's names hold."""

import numpy as np

from engine.stationarity import diagnose
from viewer import figures

PNG = b"\x89PNG\r\n\x1a\n"


def test_stationarity_figures_take_any_column_name():
    rng = np.random.default_rng(0)
    xyz = rng.uniform(0, 300, (1500, 3))
    values = np.exp(rng.normal(0.0, 0.6, 1500))
    checks = diagnose(xyz, values)["checks"]
    name = "cu $^$ pct <i>x</i>"  # paired dollar signs would start matplotlib's mathematics mode
    images = [figures.swaths(checks["trend"], name),
              figures.proportional_effect(checks["proportional_effect"], name),
              figures.mixture(checks["mixture"], values, name), figures.sill(checks["sill"], name),
              figures.halves(checks["halves"], xyz, name)]
    for image in images:
        assert image.startswith(PNG) and len(image) > 5000
