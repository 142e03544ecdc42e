"""A p-value below the display floor reads "p < 1e-10" in every sentence, never "p = < 1e-10"."""

from __future__ import annotations

import numpy as np
import pandas as pd

import explorer as ex
from explorer.formatting import p_equals


def test_p_equals_wording() -> None:
    assert p_equals(0.0312) == "p = 0.0312"
    assert p_equals(1e-30) == "p < 1e-10"
    assert p_equals(1e-30, "adjusted p") == "adjusted p < 1e-10"


def test_no_sentence_reads_p_equals_less_than() -> None:
    """Invented data with a huge effect: every text and HTML surface of the study and battery."""
    rng = np.random.default_rng(7)
    lines = np.repeat(["L1", "L2", "L3"], 20)
    y = rng.normal(0, 1, 60) + np.repeat([0.0, 50.0, 100.0], 20)
    study = ex.Study(pd.DataFrame({"y": y, "line": lines}), "y", "line")
    battery = study.battery()
    texts = [str(study), study._repr_html_(), repr(battery), str(battery), battery._repr_html_(),
             study.decision.sentence() if hasattr(study.decision, "sentence") else str(study.decision)]
    for text in texts:
        assert "p = <" not in text and "p = &lt;" not in text
