"""What the batch can expect of its calls, and whether the readouts fit the assay model."""
from __future__ import annotations

import pandas as pd

from .escape import text
from .markup import el, facts, frame_table, section

_ROWS = (("expected_missed", "Expected missed positives among negative calls", "{:.2f}"),
         ("expected_false_positives", "Expected false positives among positive calls", "{:.2f}"),
         ("expected_sensitivity", "Expected batch sensitivity of the calls", "{:.3f}"),
         ("expected_false_discovery_rate", "Expected false discovery rate of the positive calls", "{:.3f}"))


def expectations_section(posterior) -> str:
    """The calls' rule, the batch's expected errors with 95% intervals, the model check."""
    b, m = posterior.batch, posterior.model_check
    if not b and not m:
        return ""
    body = facts([("Calls", text(posterior.decision_rule.describe()))])
    if b:
        rows = pd.DataFrame([{"quantity": name, "expected": fmt_.format(b[key]["mean"]),
                              "95% interval": f"{fmt_.format(b[key]['low'])} to "
                                              f"{fmt_.format(b[key]['high'])}"}
                             for key, name, fmt_ in _ROWS])
        body += el("h3", "What this batch can expect of its calls") + frame_table(rows)
        body += el("p", text(f"From the joint posterior: {b['basis']}."
                             + (" Approximate where stated." if b["approximate"] else "")),
                   class_="muted")
    if m and m.get("checks"):
        verdict = ("The readouts do not fit the assay model" if m["warnings"] else
                   "No misfit found between the readouts and the assay model")
        body += el("h3", "Model check") + el(
            "p", text(f"{verdict} (posterior predictive p = {m['p_value']:.3g}, "
                      f"{m['draws']} replicates; Gelman, Meng & Stern 1996)."),
            class_="warn" if m["warnings"] else "ok", id="model-check")
        checks = pd.DataFrame([{"check": c["description"], "observed": c["observed"],
                                "expected": round(c["expected"], 2), "p_value": c["p_value"]}
                               for c in m["checks"]])
        body += frame_table(checks)
        if m["warnings"]:
            body += el("div", el("ul", "".join(el("li", text(w)) for w in m["warnings"])),
                       class_="warn")
    return section("expectations", "Calls and model fit", body)
