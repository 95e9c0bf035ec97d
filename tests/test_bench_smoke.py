"""The benchmark module runs and writes every row: a smoke test, never a timing assertion.

Speed goals are measured by ``make bench`` as same-run ratios (tests/bench); here we only
prove that ``python -m tests.bench`` works end to end in its quick mode, so that it cannot
rot. Three repeats and no browser keep it to a few seconds.
"""

import json
import math
import os
import subprocess
import sys
from pathlib import Path

try:
    from tests.bench.runner import ROW_IDS
except ImportError:  # pytest put tests/ itself on the path (rootdir conftest, no tests/__init__.py)
    from bench.runner import ROW_IDS

ROOT = Path(__file__).resolve().parent.parent
NUMERIC = ("ours", "reference", "ratio")


def test_quick_benchmark_writes_every_row_with_numbers(tmp_path):
    out = tmp_path / "bench.json"
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))
    done = subprocess.run(
        [sys.executable, "-m", "tests.bench", "--quick", "--repeats", "3", "--budget", "5", "--no-browser",
         "--out", str(out)],
        cwd=ROOT, env=env, capture_output=True, text=True, timeout=240,
    )
    assert done.returncode == 0, done.stdout[-2000:] + done.stderr[-2000:]
    results = json.loads(out.read_text())
    rows = {row["id"]: row for row in results["rows"]}
    assert set(rows) == set(ROW_IDS)  # every case has a row, measured or saying why not
    assert results["machine"]["cpu_count"] >= 1 and results["versions"]["numpy"]
    for row in rows.values():
        assert not row["status"].startswith("error"), row
        if row["status"] == "ok":
            assert isinstance(row["ours"], float) and math.isfinite(row["ours"]) and row["ours"] > 0, row
            if row["kind"] != "absolute":
                for key in NUMERIC:
                    assert isinstance(row[key], float) and math.isfinite(row[key]), (key, row)
        elif row["status"].startswith("partial"):  # e.g. the minute-long reference skipped in quick mode
            assert isinstance(row["ours"], float) and math.isfinite(row["ours"]) and row["reference"] is None, row
        else:
            assert row["status"].startswith(("not available (feature missing", "skipped")), row
    # The fit and the prediction path exist from the start, so these rows are always measured.
    assert rows["fit_large"]["status"] == "ok" and rows["refresh_no_slice_vs_statsmodels"]["status"] == "ok"
    assert all(rows[i]["status"] == "skipped (not selected)" for i in ("slider_p50", "first_view", "kernel_memory"))
    # The many-viewers case (10) is a browser case too: --no-browser skips it, and its rows still appear.
    assert all(rows[i]["status"] == "skipped (not selected)" for i in ("viewers_slider_p50", "viewers_slider_p95",
                                                                     "viewers_kernel_memory"))
    assert "| case | ours (median)" in done.stdout
