"""Run Snakemake on the repository's Snakefile in a temporary working directory."""

import re
import subprocess
import sys
from pathlib import Path

import yaml

REPO = Path(__file__).resolve().parents[2]
DATA = Path(__file__).resolve().parent / "data"


def smk_cmd(workdir, configfile, *args, profiles=("--profile", "none", "--workflow-profile", "none")):
    return [
        sys.executable,
        "-m",
        "snakemake",
        "--snakefile",
        str(REPO / "Snakefile"),
        "--directory",
        str(workdir),
        "--configfile",
        str(configfile),
        *profiles,
        "--show-failed-logs",
        *args,
    ]


def smk(workdir, configfile, *args, check=True, cores="2", timeout=600, **kw):
    cmd = smk_cmd(workdir, configfile, "--cores", cores, *args, **kw)
    r = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout)
    if check and r.returncode != 0:
        raise AssertionError(f"snakemake failed ({r.returncode}):\n{r.stdout[-3000:]}\n{r.stderr[-5000:]}")
    return r


def job_counts(output: str) -> dict[str, int]:
    """The 'Job stats' table Snakemake prints before running: rule -> count."""
    counts = {}
    m = re.search(r"job\s+count\s*\n-+\s+-+\n(.*?)\ntotal", output, re.S)
    if m:
        for line in m.group(1).splitlines():
            parts = line.split()
            if len(parts) == 2 and parts[1].isdigit():
                counts[parts[0]] = int(parts[1])
    return counts


def write_study(path, base="tiny_study.yaml", **changes):
    """Copy a study file from tests/workflow/data with nested changes applied."""
    study = yaml.safe_load((DATA / base).read_text())
    for dotted, value in changes.items():
        node = study
        keys = dotted.split("__")
        for k in keys[:-1]:
            node = node.setdefault(k, {})
        node[keys[-1]] = value
    path.write_text(yaml.safe_dump(study, sort_keys=False))
    return path


_BATCH_LINE = re.compile(
    r"knudsweep: batch (\S+): (\d+) points?, (\d+) solved, (\d+) reused, (\d+) failed to converge, "
    r"(\d+) crashed"
)


def batch_lines(output: str) -> list[dict]:
    """The one-line summaries batch jobs print: key, points, solved, reused, failed, crashed."""
    return [
        {
            "key": m[1],
            "points": int(m[2]),
            "solved": int(m[3]),
            "reused": int(m[4]),
            "failed": int(m[5]),
            "crashed": int(m[6]),
        }
        for m in _BATCH_LINE.finditer(output)
    ]


def solved_in(output: str) -> int:
    """Points solved by the batch jobs of a run whose console output is ``output``."""
    return sum(b["solved"] for b in batch_lines(output))
