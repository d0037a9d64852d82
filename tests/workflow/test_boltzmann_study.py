"""A tiny study with the linearized Boltzmann model (boltzmann_hard_sphere) beside the S-model, through
Snakemake end to end: points solved, the model-error table and figure written, status complete."""

import pandas as pd

from tests.workflow.wf_helpers import smk, write_study


def test_study_with_boltzmann_model_writes_model_error_products(tmp_path):
    study = write_study(
        tmp_path / "lbe.yaml",
        study="lbe",
        plane_channel__problems=["poiseuille", "thermal_creep"],
        plane_channel__models=["s_model", "boltzmann_hard_sphere"],
        plane_channel__gases=["Ar"],
        plane_channel__delta=[0.1, 1.0],
        plane_channel__resolution={"n_space": 16, "n_velocity": 4, "tol": 1.0e-8},
    )
    work = tmp_path / "run"
    work.mkdir()
    smk(work, study, timeout=900)
    frame = pd.read_csv(work / "results" / "lbe" / "tables" / "plane_channel_model_error.csv")
    assert len(frame) == 2  # one wall x two delta
    for key in ("G_P", "G_T"):
        ratio = frame[f"{key} S-model / Boltzmann [1]"].to_numpy(float)
        ref = frame[f"{key} linearized Boltzmann (hard spheres) [1]"].to_numpy(float)
        # S-model / LBE measured 0.92-1.05 at delta 0.1-1 (benchmarks/bench_boltzmann_channel.py)
        assert ((ratio > 0.85) & (ratio < 1.15)).all() and (ref > 0).all()
        assert (frame[f"{key} linearized Boltzmann (hard spheres) status"] == "converged").all()
    assert (work / "results" / "lbe" / "figures" / "plane_channel_model_error_vs_delta.png").stat().st_size > 0
