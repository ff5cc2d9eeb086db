"""A fleet of campaigns reduced by four concurrent shards of `stagna run` into one
hive-partitioned Parquet dataset, read back by two existing engines (DuckDB and
python-polars) and compared with one unsharded run: the union must be the same rows."""

import os
import pathlib
import subprocess

import duckdb  # installed by tests/run-all (tests/jupyter/requirements.txt): never skipped
import polars as pl

EA4 = [33.5, 125.0, 375.0, 466.5]  # US EPA Method 1 Table 1-1, 4 points on 500 mm


def stagna_bin():
    b = os.environ.get("STAGNA_BIN")
    assert b, "STAGNA_BIN is set by tests/run-all"
    return b


def make_inputs(root):
    files = []
    for s, site in enumerate(["north", "south"]):
        for c, campaign in enumerate(["c2025", "c2026"]):
            for k in range(3):
                rows = ["site,campaign,traverse,deflection_mm,fluid_temp_c,diameter_mm,position_mm"]
                for tr in range(2):
                    for p, y in enumerate(EA4):
                        h = 20.0 + s + 0.5 * c + 0.25 * k + tr + (2.0 if p in (1, 2) else 0.0)
                        rows.append(f"{site},{campaign},T{tr + 1},{h},{18 + k},500,{y}")
                f = root / "in" / site / f"{site}-{campaign}-{k}.csv"
                f.parent.mkdir(parents=True, exist_ok=True)
                f.write_text("\n".join(rows) + "\n")
                files.append(str(f))
    return files


SCRIPT = """
let t = read_table(input).units(#{deflection_mm: "mm", fluid_temp_c: "degC", diameter_mm: "mm", position_mm: "mm"});
let spec = #{fluid: dry_air(), static_pressure: 101.kPa, manometer: u_tube(gauge_water()), probe: pitot_static(1.0),
    columns: #{traverse: "traverse", deflection: "deflection_mm", fluid_temperature: "fluid_temp_c", size: "diameter_mm", position: "position_mm"}};
point_velocities(t, spec).write_partitioned(run_dir + "/fleet", #{by: ["site", "campaign"], name: input_name});
"""


def run(args):
    return subprocess.Popen([stagna_bin(), "run", *args], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def read_both(folder):
    glob = str(folder / "fleet" / "**" / "*.parquet")
    order = ["site", "campaign", "traverse", "fluid_temp_c", "position_mm", "deflection_mm"]
    rel = duckdb.sql(f"SELECT * FROM read_parquet('{glob}', hive_partitioning = true)")
    d = pl.DataFrame(rel.fetchall(), schema=rel.columns, orient="row")
    p = pl.scan_parquet(glob, hive_partitioning=True).collect()
    cols = sorted(d.columns)
    return d.select(cols).sort(order), p.select(cols).sort(order)


def test_sharded_runs_reassemble_through_duckdb_and_polars(tmp_path):
    files = make_inputs(tmp_path)
    script = tmp_path / "reduce.rhai"
    script.write_text(SCRIPT)
    whole = run([str(script), "-o", str(tmp_path / "whole"), *files])
    out, err = whole.communicate(timeout=300)
    assert whole.returncode == 0, err
    shards = [run([str(script), "-o", str(tmp_path / "sharded"), "--shard", f"{k}/4", *files]) for k in range(4)]
    for k, s in enumerate(shards):
        _, err = s.communicate(timeout=300)
        assert s.returncode == 0, f"shard {k}: {err}"
    wd, wp = read_both(tmp_path / "whole")
    sd, sp = read_both(tmp_path / "sharded")
    # 12 inputs × 2 traverses × 4 points; the partition columns come back from the paths.
    assert wd.height == 96 and set(wd["site"].unique()) == {"north", "south"}
    assert wd.equals(wp), "DuckDB and polars read the same dataset"
    assert sd.equals(wd) and sp.equals(wp), "four shards together equal one run"
    # Units travel in each file's metadata.
    one = next((tmp_path / "sharded" / "fleet").rglob("*.parquet"))
    meta = pl.read_parquet_metadata(one)
    assert meta.get("stagna.unit:velocity_m_s") == "m/s", meta
