"""``bayespool decode --method gibbs`` from the command line (interface.md)."""
import json

from .conftest import write_csv


def files(tmp_path):
    # invented data for a command-line check: A and B share a positive pool
    layout = write_csv(tmp_path / "layout.csv",
                       [("P1", "A"), ("P1", "B"), ("P2", "C"), ("P2", "D"), ("P3", "A"),
                        ("P3", "C")], ["pool", "sample"])
    reads = write_csv(tmp_path / "readouts.csv",
                      [("P1", "positive"), ("P1", "positive"), ("P2", "negative"),
                       ("P3", "negative")], ["pool", "result"])
    assay = tmp_path / "assay.toml"
    assay.write_text('specificity = 0.999\n[sensitivity]\nmodel = "constant"\nvalue = 0.98\n')
    return layout, reads, assay


def test_gibbs_json_carries_diagnostics_and_joint_answers(cli, tmp_path):
    layout, reads, assay = files(tmp_path)
    out = tmp_path / "post.csv"
    r = cli("decode", "--layout", layout, "--readouts", reads, "--assay", assay, "--method",
            "gibbs", "--seed", 1, "--out", out, "--json")
    assert r.code == 0, r.err
    summary = json.loads(r.out)
    g = summary["gibbs"]
    assert summary["method"] == "gibbs" and g["converged"] is True
    assert g["rhat_max"] <= 1.01 and g["ess_min"] >= 400
    assert summary["positives"]["interval_95"][0] <= summary["positives"]["interval_95"][1]
    assert summary["positives_posterior"]["interval_95"]
    assert any(grp["samples"] == ["B", "A"] or grp["samples"] == ["A", "B"]
               for grp in summary["ambiguity_groups"])
    header = out.read_text().splitlines()[0].split(",")
    assert header[:3] == ["sample", "probability", "call"] and "mcse" in header
    assert "rhat" in header and "ess" in header


def test_gibbs_text_output_and_unknown_prevalence(cli, tmp_path):
    layout, reads, assay = files(tmp_path)
    out = tmp_path / "post.csv"
    r = cli("decode", "--layout", layout, "--readouts", reads, "--assay", assay, "--method",
            "gibbs", "--seed", 2, "--prevalence-prior", "1,9", "--chains", 3, "--out", out)
    assert r.code == 0, r.err
    assert "Gibbs sampler: converged" in r.out
    assert "prevalence: posterior mean" in r.out
    assert "is positive, probability" in r.out


def test_bad_gibbs_options_exit_2_without_output(cli, tmp_path):
    layout, reads, assay = files(tmp_path)
    out = tmp_path / "post.csv"
    for extra in (["--prevalence-prior", "1"], ["--prevalence-prior", "-1,2"], ["--chains", "0"],
                  ["--gibbs-sweeps", "3"]):
        r = cli("decode", "--layout", layout, "--readouts", reads, "--assay", assay, "--method",
                "gibbs", "--out", out, *extra)
        assert r.code == 2, (extra, r.err)
        assert r.err.count("\n") == 1 and "Traceback" not in r.err
        assert not out.exists()
