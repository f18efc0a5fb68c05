"""A Run is immutable: fields cannot be reassigned, its sources and notes cannot be edited in
place, and every change (prior, readouts, sources, notes, planned pools) makes a new run and leaves
the old one as it was."""
import dataclasses

import numpy as np
import pandas as pd
import pytest

from bayespool.run import Run

LAYOUT = pd.DataFrame({"pool": ["A", "A", "B", "B", "C"], "sample": ["s1", "s2", "s2", "s3", "s3"]})
READOUTS = pd.DataFrame({"pool": ["A", "B"], "result": ["positive", "negative"]})


def small_run():
    return Run.from_frames(LAYOUT, READOUTS, prevalence=0.1)


@pytest.mark.parametrize("name", [f.name for f in dataclasses.fields(Run)])
def test_assigning_any_field_raises(name):
    run = small_run()
    with pytest.raises(dataclasses.FrozenInstanceError):
        setattr(run, name, getattr(run, name))


def test_sources_and_notes_cannot_be_edited_in_place():
    run = small_run()
    with pytest.raises(TypeError):
        run.sources["assay"] = "a.toml"
    with pytest.raises(AttributeError):
        run.notes.append("x")


def test_pool_read_counts_replicates():
    run = small_run().with_readouts([0, 2], [1, 0])
    assert run.pool_reads.tolist() == [2, 1, 1]
    assert run.pool_read.tolist() == [True, True, True]
    assert small_run().pool_read.tolist() == [True, True, False]


def test_changes_make_new_runs_and_leave_the_old_one():
    run = small_run()
    prior = run.prior.copy()
    moved = run.with_prior(0.3)
    assert np.all(moved.prior == 0.3) and np.array_equal(run.prior, prior)
    named = run.with_sources(assay="a.toml")
    assert named.sources["assay"] == "a.toml" and "assay" not in run.sources
    noted = run.with_notes(["checked"])
    assert noted.notes == run.notes + ("checked",) and run.notes == ()
    more = run.with_readouts([2, 2], [1, 1], ct=[30.0, 31.5])
    assert more.n_positive.tolist() == [1, 0, 2] and run.n_positive.tolist() == [1, 0, 0]
    assert more.readout_ct["ct"].tolist() == [30.0, 31.5] and run.readout_ct is None


def test_read_run_records_its_files(tmp_path):
    lay, rd = tmp_path / "layout.csv", tmp_path / "readouts.csv"
    LAYOUT.to_csv(lay, index=False)
    READOUTS.to_csv(rd, index=False)
    run = Run.read(lay, rd)
    assert dict(run.sources) == {"layout": str(lay), "readouts": str(rd), "samples": None}
