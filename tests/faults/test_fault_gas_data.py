"""An edit of the gas table must recompute exactly the points whose numbers depend on it,
and rebuild every product that converts with it (it used to say "Nothing to be done").

Plane-channel coefficients are reduced (they depend on delta, not on the gas), so an edit
of argon's viscosity must not solve them again, but the tables, which turn delta into
pressures with the gas's viscosity, must be rebuilt. A relaxation point's collision time
in seconds depends on the viscosity, so its point must be solved again.
"""

from __future__ import annotations

import subprocess
import sys

import yaml
from fault_helpers import REPO, batch_lines, job_counts, smk, write_study

from knudsweep.config import validate_study
from knudsweep.plan import StudyPlan

RELAXATION = {
    "gases": ["Ar"],
    "pressures": [100.0],
    "temperatures": [300.0],
    "initial_states": ["anisotropic"],
    "molecular_models": ["maxwell"],
    "methods": ["bgk"],
    "run": {"n_replicas": 1, "t_end": 2.0, "n_output": 5, "seed": 1, "h_bins_per_axis": 4, "n_velocity": 12},
}


def _edited_gas_file(tmp_path, factor: float):
    table = yaml.safe_load((REPO / "config" / "gases.yaml").read_text())
    table["gases"]["Ar"]["mu_ref_uPa_s"] = float(table["gases"]["Ar"]["mu_ref_uPa_s"]) * factor
    path = tmp_path / "gases.yaml"
    path.write_text(yaml.safe_dump(table, sort_keys=False))
    return path


def test_relaxation_point_values_carry_the_gas_data(tmp_path, monkeypatch):
    study = validate_study(yaml.safe_load(write_study(tmp_path / "s.yaml", relaxation=RELAXATION).read_text()))
    before = {pid: p.values for pid, p in StudyPlan(study).points.items()}
    monkeypatch.setenv("KNUDSWEEP_GAS_FILE", str(_edited_gas_file(tmp_path, 2.0)))
    after = {pid: p.values for pid, p in StudyPlan(study).points.items()}
    assert before.keys() == after.keys()
    changed = [pid for pid in before if before[pid] != after[pid]]
    assert changed and all(pid.startswith("relaxation/") for pid in changed)
    (pid,) = changed
    assert after[pid]["gas_data"]["mu_ref"] == 2.0 * before[pid]["gas_data"]["mu_ref"]


def test_an_edited_gas_table_recomputes_the_dependent_points_and_rebuilds_the_tables(tmp_path):
    study = write_study(tmp_path / "gas.yaml", study="gas", relaxation=RELAXATION)
    workdir = tmp_path / "w"
    smk(workdir, study)
    gas_file = _edited_gas_file(tmp_path, 2.0)
    cmd_env = {"KNUDSWEEP_GAS_FILE": str(gas_file)}
    import os

    r = subprocess.run(
        [
            sys.executable,
            "-m",
            "snakemake",
            "--snakefile",
            str(REPO / "Snakefile"),
            "--directory",
            str(workdir),
            "--configfile",
            str(study),
            "--cores",
            "2",
            "--profile",
            "none",
            "--workflow-profile",
            "none",
            "--rerun-triggers",
            "mtime",
            "params",
            "input",
        ],
        capture_output=True,
        text=True,
        timeout=600,
        env={**os.environ, **cmd_env},
    )
    out = r.stdout + r.stderr
    assert r.returncode == 0, out[-3000:]
    lines = {b["key"].split("/")[0]: b for b in batch_lines(out)}
    # the relaxation point is solved again; the plane-channel batch does not run at all
    assert "plane_channel" not in lines, lines
    assert lines["relaxation"]["solved"] == 1 and lines["relaxation"]["reused"] == 0, lines
    # the old file was sound, only outdated: replaced by the new one, not kept as corrupt
    assert not list((workdir / "results" / "points").rglob("*.corrupt"))
    counts = job_counts(out)
    assert counts.get("tables") == 1 and counts.get("gather") == 1, counts
