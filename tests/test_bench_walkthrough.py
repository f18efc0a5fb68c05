"""The README's bench walk-through, run as written: plates -> pools and worklist -> readouts with
controls -> calls -> next tests and their worklist.

The commands are read from README.md itself, so the walk-through stays true. The specimens, the
positives and the readouts are invented for the test. What is checked against the trade (common
practice in qPCR): a no-template control that amplifies invalidates the readouts of its plate, whose
specimens must be retested; a worklist moves equal volumes of each specimen into its pool.
"""
from __future__ import annotations

import re
import shlex
from pathlib import Path

import numpy as np
import pandas as pd

README = Path(__file__).resolve().parents[1] / "README.md"
SECTION = "## From plates to calls: a bench walk-through"


def _commands() -> list[list[str]]:
    """Every ``bayespool ...`` command of the walk-through section, continuation lines joined."""
    text = README.read_text(encoding="utf-8")
    start = text.index(SECTION)
    end = text.index("\n## ", start + len(SECTION))
    lines = text[start:end].splitlines()
    commands, current = [], None
    for line in lines:
        s = line.strip()
        if current is not None:
            current += " " + s.rstrip("\\").strip()
            if not s.endswith("\\"):
                commands.append(current)
                current = None
        elif s.startswith("bayespool "):
            current = s.rstrip("\\").strip()
            if not s.endswith("\\"):
                commands.append(current)
                current = None
    return [shlex.split(c)[1:] for c in commands]


def _samples(path: Path) -> pd.DataFrame:
    """Eight invented extraction plates of 96 specimens (their 96 pools fill two destination
    plates), wells spelled as in the README (A1)."""
    rows = [{"sample": f"{plate}-{r}{c:02d}", "plate": plate, "well": f"{r}{c}",
             "volume_ul": 250}
            for plate in [f"EXT{i}" for i in range(1, 9)] for c in range(1, 13) for r in "ABCDEFGH"]
    frame = pd.DataFrame(rows)
    frame.to_csv(path, index=False)
    return frame


def test_the_readme_walk_through_runs_as_written(cli, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    design, decode, plan = _commands()
    assert design[:3] == ["design", "--scheme", "dorfman"] and decode[0] == "decode" \
        and plan[0] == "plan"
    samples = _samples(tmp_path / "samples.csv")
    (tmp_path / "assay.toml").write_text(
        "specificity = 0.995\n[sensitivity]\nmodel = \"constant\"\nvalue = 0.95\n",
        encoding="utf-8")

    # 2. design and worklist: pools of 8 down plate columns, equal volumes, controls' wells kept
    r = cli(*design)
    assert r.code == 0, r.err
    layout = pd.read_csv("layout.csv", keep_default_na=False)
    worklist = pd.read_csv("worklist.csv", keep_default_na=False)
    assert len(layout) == 768 and layout.groupby("pool").size().eq(8).all()
    where = samples.set_index("sample")
    for _, members in layout.groupby("pool"):  # a pool is one plate column (a multichannel tip row)
        cells = where.loc[members["sample"]]
        assert cells["plate"].nunique() == 1
        assert {re.sub(r"^[A-H]", "", w) for w in cells["well"]} == {cells["well"].iloc[0][1:]}
    assert sorted(zip(worklist["pool"], worklist["sample"])) == \
        sorted(zip(layout["pool"], layout["sample"]))
    assert worklist.groupby("pool")["volume_ul"].sum().eq(200).all()  # 25 uL x 8
    assert not worklist["destination_well"].isin(["G12", "H12"]).any()
    assert worklist["destination_plate"].str.startswith("RUN1-").all()
    assert worklist["source_well"].isin(samples["well"]).all()

    # 3. readouts read on the destination plates, with controls; invented positives
    truth = {"EXT1-C03", "EXT5-F07", "EXT8-B11"}
    dest = worklist.drop_duplicates("pool").set_index("pool")
    rows = []
    for pool, members in layout.groupby("pool"):
        positive = bool(set(members["sample"]) & truth)
        rows.append({"pool": pool, "result": "positive" if positive else "negative",
                     "ct": "31.2" if positive else "", "plate": dest.at[pool, "destination_plate"],
                     "well": dest.at[pool, "destination_well"]})
    plates = sorted(dest["destination_plate"].unique())
    assert len(plates) >= 2
    failed = plates[-1]  # its no-template control amplifies: the plate is invalid
    controls = []
    for plate in plates:
        rows.append({"pool": "", "result": "positive", "ct": "27.9", "plate": plate,
                     "well": "G12"})
        bad = plate == failed
        rows.append({"pool": "", "result": "positive" if bad else "negative",
                     "ct": "36.0" if bad else "", "plate": plate, "well": "H12"})
        controls += [{"plate": plate, "well": "G12", "kind": "positive", "ct_min": 24,
                      "ct_max": 32},
                     {"plate": plate, "well": "H12", "kind": "negative", "ct_min": "",
                      "ct_max": ""}]
    pd.DataFrame(rows).to_csv("readouts.csv", index=False)
    pd.DataFrame(controls).to_csv("controls.csv", index=False)

    # 4. decode with the controls checked first
    r = cli(*decode)
    assert r.code == 0, r.err
    assert failed in r.out + r.err
    post = pd.read_csv("posterior.csv", keep_default_na=False).set_index("sample")
    on_failed = set(dest.index[dest["destination_plate"] == failed])
    lost = set(layout.loc[layout["pool"].isin(on_failed), "sample"])
    assert "plate_qc" in post.columns and (post.loc[sorted(lost), "plate_qc"] != "").all()
    kept = set(samples["sample"]) - lost
    calls = post.loc[sorted(kept), "call"]
    positives_kept = truth & kept
    for s in positives_kept:  # the positive pool's members are inconclusive or positive
        assert calls[s] != "negative"
    negatives = [s for s in kept
                 if not set(layout.loc[layout["sample"] == s, "pool"]) &
                 set(layout.loc[layout["sample"].isin(truth), "pool"])]
    assert (calls[negatives] == "negative").all()
    assert Path("report.html").stat().st_size > 0
    assert "Controls" in Path("report.html").read_text(encoding="utf-8")

    # 5. the next tests and their worklist: the invalid plate's specimens are retested, and no
    # specimen is drawn beyond the volume it has left after the first worklist
    samples["volume_ul"] = 225 - 200 * samples.index.isin(range(0, 768, 2))  # 25 uL left on half
    samples.to_csv("samples.csv", index=False)
    r = cli(*plan)
    assert r.code == 0, r.err
    nxt = pd.read_csv("next.csv", keep_default_na=False)
    wl2 = pd.read_csv("next-worklist.csv", keep_default_na=False)
    assert lost <= set(nxt["sample"]) or nxt["pool"].nunique() == 24
    assert set(nxt["sample"]) & lost
    built = nxt[nxt["kind"] != "replicate"]  # a replicate reads a mix already made
    assert sorted(zip(wl2["pool"], wl2["sample"])) == sorted(zip(built["pool"], built["sample"]))
    assert wl2["destination_plate"].str.startswith("RUN2-").all()
    drawn = wl2.groupby("sample")["volume_ul"].sum()
    have = samples.set_index("sample")["volume_ul"]
    assert (drawn <= have[drawn.index] + 1e-9).all()
    assert not wl2["destination_well"].isin(["G12", "H12"]).any()
    assert np.allclose(wl2.groupby("pool")["volume_ul"].sum(), wl2.groupby("pool")["volume_ul"]
                       .sum().iloc[0])
