"""The benchmark script runs, and its workloads meet the accuracy they were given.

``scripts/bench.py --quick`` runs every standard workload at small sizes (16×16
pixels, 100 energies, …) in subprocesses, with its accuracy references. Speed
figures are not checked here (benchmarks are measured, never asserted); what is
checked is that the script still works and that each workload's measured error
against its converged reference (tolerance 1e-6, input path 4× denser) is within
the engine's default relative tolerance 1e-4 — the goal every workload was run
with. The time-domain workload has no tolerance setting; 1e-4 is the goal the
benchmark states for it. Runtime ≈ 30 s on the 2-core CI machine.
"""

import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
GOAL = 1e-4  # lwrad's default relative tolerance (radiate) — the goal of every workload


def test_bench_quick_runs_every_workload_within_its_goal(tmp_path):
    out = tmp_path / "bench.json"
    proc = subprocess.run(
        [sys.executable, str(ROOT / "scripts" / "bench.py"), "--quick", "--json", str(out)],
        capture_output=True,
        text=True,
        timeout=600,
    )
    assert proc.returncode == 0, proc.stderr
    assert "failed" not in proc.stderr, proc.stderr
    records = {r["workload"]: r for r in json.loads(out.read_text())["records"]}
    assert sorted(records) == [1, 2, 3, 4, 5]
    for number, rec in records.items():
        assert 0.0 < rec["wall_s_2w"] < float("inf"), number
        assert 0.0 < rec["wall_s_1w"] < float("inf"), number
        assert rec["relative_error"] <= GOAL, (number, rec["relative_error"])
        assert rec["peak_memory_MB"] > 0.0, number
