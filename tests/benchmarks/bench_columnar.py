"""Benchmark: load_trajectory on 1,000,000 rows as CSV and as Parquet (and Arrow IPC), one run.

Not run by CI (not named test_*). Run:  python tests/benchmarks/bench_columnar.py [rows]

The three files hold the same invented path (bench_load.invented_path: a wandering TCP path
at a jittered 1 kHz). Each is loaded once by load_trajectory, with the same column mapping
and the same validation; the figures are wall-clock seconds of that one run, so they are
noisy on a shared machine: read the ratios, measured side by side in the same run. The CPU
seconds of this process (all its threads) are printed beside them: on a host loaded by other
work they move less than the wall clock, which counts the time spent waiting for a core.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.feather as feather
import pyarrow.parquet as pq

from reachgate.model.trajectory import load_trajectory, write_trajectory

sys.path.insert(0, str(Path(__file__).parent))
from bench_load import invented_path


def timed(call) -> tuple[float, float, object]:
    """(wall-clock s, CPU s of this process, result) of one call."""
    start, start_cpu = time.perf_counter(), time.process_time()
    result = call()
    return time.perf_counter() - start, time.process_time() - start_cpu, result


def main(rows: int = 1_000_000) -> None:
    path = invented_path(rows)
    columns = np.column_stack([path.t_s, path.scenario_p_m, path.scenario_q_wxyz])
    table = pa.table(dict(zip(("t_s", "x_m", "y_m", "z_m", "qw", "qx", "qy", "qz"),
                              columns.T, strict=True)))  # fmt: skip
    with tempfile.TemporaryDirectory() as folder:
        csv_file = Path(folder) / "case.csv"
        parquet_file = Path(folder) / "case.parquet"
        arrow_file = Path(folder) / "case.feather"
        write_trajectory(csv_file, path)
        pq.write_table(table, parquet_file)
        feather.write_feather(table, arrow_file)
        # Readers imported before timing (as in a scan's workers): the CSV path then uses
        # pyarrow's CSV reader, and no run pays a first import.
        import pyarrow.csv  # noqa: F401

        results = {}
        for label, file in (("CSV", csv_file), ("Parquet", parquet_file),
                            ("Arrow IPC", arrow_file)):  # fmt: skip
            seconds, cpu_s, loaded = timed(lambda file=file: load_trajectory(file))
            assert np.array_equal(loaded.t_s, path.t_s)
            assert np.array_equal(loaded.scenario_p_m, path.scenario_p_m)
            size_mb = file.stat().st_size / 1e6
            results[label] = (seconds, cpu_s)
            print(f"load_trajectory, {rows} rows, {label:9s}: {seconds:6.3f} s wall, "
                  f"{cpu_s:6.3f} s CPU  ({size_mb:.0f} MB)")  # fmt: skip
    csv_wall, csv_cpu = results["CSV"]
    for label in ("Parquet", "Arrow IPC"):
        wall, cpu = results[label]
        print(f"CSV / {label} load time: {csv_wall / wall:.1f}x wall, {csv_cpu / cpu:.1f}x CPU")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000)
