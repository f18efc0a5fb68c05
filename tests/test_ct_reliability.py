"""Posterior calibration of decoding with Ct readouts (scripts/ct_reliability.py, few runs).

Reference: the model's definition, simulated directly in the script (statuses, individual Cts from
the mixture, pooled Ct by the dilution law, noise, detection, cutoff, false amplifications); a
correct posterior is calibrated by construction, so each probability bin's summed residual
(positives minus summed probabilities) is zero within Monte Carlo error. The figure over 250 runs
is in README.md.
"""
import importlib.util
from pathlib import Path

import numpy as np


def load_script():
    path = Path(__file__).resolve().parents[1] / "scripts" / "ct_reliability.py"
    spec = importlib.util.spec_from_file_location("ct_reliability", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_decoded_probabilities_are_calibrated_on_runs_from_the_ct_model():
    table = load_script().reliability(runs=16, seed=11)
    used = table[table["specimens"] >= 10]
    # the intermediate bins are populated (the Cts and the partial follow-up leave doubt)
    assert ((used["low"] >= 0.05) & (used["high"] <= 0.95)).sum() >= 3, table
    # 7 bins: |z| < 3.5 has a family-wise false alarm rate below 0.4 % for a calibrated decoder
    assert np.all(np.abs(used["z"]) < 3.5), table
