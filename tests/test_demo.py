"""The demo runs end to end and writes what it says (its data is invented, so nothing is checked
against it beyond consistency)."""
import pandas as pd

from bayespool.demo import invented_run


def test_demo_runs_and_writes_its_files(cli, tmp_path):
    folder = tmp_path / "demo"
    res = cli("demo", "--out-dir", folder)
    assert res.code == 0, res.err
    assert "invented" in res.out
    post = pd.read_csv(folder / "posterior.csv")
    assert len(post) == 288
    assert set(post["call"]) <= {"positive", "negative", "inconclusive"}
    for name in ("layout.csv", "readouts.csv", "samples.csv", "assay.toml"):
        assert (folder / name).exists()
        assert str(folder / name) in res.out


def test_shipped_demo_files_match_the_generator(tmp_path):
    # datasets/demo holds the same invented files the demo writes, for trying decode by hand.
    from pathlib import Path
    root = Path(__file__).resolve().parents[1] / "datasets" / "demo"
    layout, readouts, samples, _ = invented_run()
    assert pd.read_csv(root / "layout.csv").equals(layout)
    shipped = pd.read_csv(root / "readouts.csv", dtype={"ct": str}, keep_default_na=False)
    assert shipped.equals(readouts.astype({"ct": str}))
