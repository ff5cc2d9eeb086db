#!/usr/bin/env python3
"""Campaign reduction against its peers, measured in the same run (prints figures, asserts nothing).

Each contestant is one process, started and timed as a user runs it (interpreter start, imports,
reading, physics, per-traverse table, exit), on the same synthetic campaign files:

  stagna-scan   `stagna run` with scan_table + reduce_campaign (batches, only the columns used)
  stagna-read   `stagna run` with read_table + reduce_campaign (the whole table first)
  polars-lazy   python-polars scan_parquet / scan_csv, lazy query, default in-memory engine
  polars-stream the same query collected with engine="streaming"
  pandas        pandas read_parquet / read_csv (pyarrow engine, only the columns used) + numpy + groupby

Every contestant computes the same physics per reading (CIPM-2007 humid-air density, the gauge
oil's density at the reading's temperature, the inclined gauge's Δp, the isentropic pitot
velocity) and per traverse (points, mean velocity, volume and mass flow, mean density, maximum
velocity, flatness, reversed points), and prints the sums; the driver checks they agree.
Runs are interleaved (every contestant once a round, in another order each round) so that a slow
spell of the machine hits all alike and no contestant always starts just after the same one;
the figure is the median wall time, with the peak resident memory of the process (wait4).

Usage: bench/run  (or: python bench/campaign_peers.py --stagna target/release/stagna
       [--sizes 1e6,1e7] [--formats parquet,csv] [--repeat 3] [--dir DIR])
"""

import argparse
import math
import os
import statistics
import subprocess
import sys
import tempfile
import time

# The synthetic campaign: 20 readings a traverse (2 lines × 10 equal-area points), ducts of
# 400–1600 mm, a power-law-like deflection pattern with 1 % scatter read to 0.01 mm, a
# temperature per traverse with 0.15 K scatter read to 0.1 °C (so that files compress as logged
# readings do, not as a repeating pattern), and two columns the reduction does not need (a time
# stamp and an operator number), as logged files have. Seeded: every run makes the same files.
USED = ["traverse", "line", "position_mm", "deflection_mm", "fluid_temp_c", "diameter_mm"]


def make_campaign(readings, path, first=0, seed=20261203):
    import numpy as np
    import polars as pl

    per = 20
    traverses = readings // per
    ea = [(1.0 - math.sqrt((2 * i - 1) / 10.0)) / 2.0 for i in range(1, 6)][::-1]
    frac = np.array(ea + [1.0 - y for y in ea[::-1]])
    rng = np.random.default_rng(seed)
    t = np.repeat(np.arange(first, first + traverses, dtype=np.int64), per)
    k = np.tile(np.arange(per, dtype=np.int64), traverses)
    y = frac[k % 10]
    d = 400.0 + (t % 13) * 100.0
    n = traverses * per
    h = (20.0 + (t % 29)) * (2.0 * np.minimum(y, 1.0 - y)) ** (2.0 / 7.0) * (1.0 + 0.01 * rng.standard_normal(n))
    tc = 15.0 + (t % 17).astype(np.float64) + 0.15 * rng.standard_normal(n)
    df = pl.DataFrame(
        {
            "traverse": t,
            "line": k // 10,
            "position_mm": y * d,
            "deflection_mm": np.round(h, 2),
            "fluid_temp_c": np.round(tc, 1),
            "diameter_mm": d,
            "time_s": t * 90.0 + k * 3.0,
            "operator": t % 7,
        }
    )
    if path.endswith(".parquet"):
        df.write_parquet(path)  # python-polars' default row groups: many chunks on reading
    else:
        df.write_csv(path)


STAGNA_SCRIPT = r"""
let units = #{deflection_mm: "mm", fluid_temp_c: "degC", diameter_mm: "mm", position_mm: "mm"};
let readings = if ROUTE == "sink" { () } else if ROUTE == "scan" { scan_table(input).units(units) } else { read_table(input).units(units) };
let spec = #{
    fluid: humid_air(0.5), static_pressure: 101.kPa,
    manometer: inclined_gauge(gauge_liquid("oil", 826.kg_m3, 20.degC, 7.5e-4), 30, 0.002),
    probe: pitot_static(0.998),
    columns: #{traverse: "traverse", deflection: "deflection_mm", fluid_temperature: "fluid_temp_c",
               size: "diameter_mm", position: "position_mm", line: "line"},
    min_points: 20
};
if ROUTE == "sink" {
    // A folder too large to hold (given with --set source=FOLDER), straight into a file.
    let r = reduce_campaign_to(scan_table(source).units(units), spec, "traverses.parquet");
    print(`RESULT n=${r.traverses} q=0 m=0 points=${r.readings}`);
    return;
}
let t = reduce_campaign(readings, spec).traverses;
print(`RESULT n=${t.len} q=${t["volume_flow_m3_s"].sum().value} m=${t["mass_flow_kg_s"].sum().value} points=${t["points"].sum().value}`);
"""

# CIPM-2007 (Picard et al. 2008) constants, as lib/src/fluids/humid_air.rs has them.
P = 101_000.0
R = 8.314472
MW = 18.01528e-3
MA = 28.96546e-3  # x_CO2 = 0.0004
A = (1.2378847e-5, -1.9121316e-2, 33.93711047, -6.3431645e3)
ENH = (1.00062, 3.14e-8, 5.6e-7)
ZA = (1.58123e-6, -2.9331e-8, 1.1043e-10)
ZB = (5.707e-6, -2.051e-8)
ZC = (1.9898e-4, -2.376e-6)
ZD, ZE = 1.83e-11, -0.765e-8
G_FACTOR = 9.80665 * (math.sin(math.radians(30.0)) + 0.002)
C, GAMMA = 0.998, 1.4


def physics(tc, h_mm, exp, sqrt, absf, sign):
    """Density, Δp and velocity from temperature (°C) and deflection (mm), in any array algebra."""
    tk = tc + 273.15
    psv = exp(A[0] * tk * tk + A[1] * tk + A[2] + A[3] / tk)
    f = ENH[0] + ENH[1] * P + ENH[2] * tc * tc
    xv = 0.5 * f * psv / P
    z = (
        1.0
        - P / tk * (ZA[0] + ZA[1] * tc + ZA[2] * tc * tc + (ZB[0] + ZB[1] * tc) * xv + (ZC[0] + ZC[1] * tc) * xv * xv)
        + (P / tk) ** 2 * (ZD + ZE * xv * xv)
    )
    rho = P * MA / (z * R * tk) * (1.0 - xv * (1.0 - MW / MA))
    rho_m = 826.0 / (1.0 + 7.5e-4 * (tc - 20.0))
    dp = (rho_m - rho) * G_FACTOR * (h_mm / 1000.0)
    e = (GAMMA - 1.0) / GAMMA
    v = sqrt(2.0 / e * P / rho * ((1.0 + C * C * absf(dp) / P) ** e - 1.0)) * sign(dp)
    return rho, dp, v


def peer_polars(path, engine):
    import polars as pl

    lf = pl.scan_parquet(path) if path.endswith(".parquet") else pl.scan_csv(path)
    tc, h = pl.col("fluid_temp_c"), pl.col("deflection_mm")
    rho, dp, v = physics(tc, h, lambda x: x.exp(), lambda x: x.sqrt(), lambda x: x.abs(), lambda x: x.sign())
    per = (
        lf.select(pl.col("traverse"), pl.col("diameter_mm"), rho.alias("rho"), dp.alias("dp"), v.alias("v"))
        .group_by("traverse")
        .agg(
            points=pl.len(),
            mean_v=pl.col("v").mean(),
            rho=pl.col("rho").mean(),
            vmax=pl.col("v").max(),
            d=pl.col("diameter_mm").first(),
            reversed=(pl.col("dp") < 0).sum(),
        )
        .with_columns(q=pl.col("mean_v") * math.pi * (pl.col("d") / 1000.0) ** 2 / 4.0)
        .with_columns(m=pl.col("q") * pl.col("rho"), flatness=pl.col("mean_v") / pl.col("vmax"))
    )
    t = per.collect(engine=engine)
    print(f"RESULT n={t.height} q={t['q'].sum()} m={t['m'].sum()} points={t['points'].sum()}")


def peer_polars_sink(folder, out):
    """The larger-than-memory peer: the same query over a folder, streamed into a Parquet file."""
    import polars as pl

    lf = pl.scan_parquet(os.path.join(folder, "*.parquet"))
    tc, h = pl.col("fluid_temp_c"), pl.col("deflection_mm")
    rho, dp, v = physics(tc, h, lambda x: x.exp(), lambda x: x.sqrt(), lambda x: x.abs(), lambda x: x.sign())
    (
        lf.select(pl.col("traverse"), pl.col("diameter_mm"), rho.alias("rho"), dp.alias("dp"), v.alias("v"))
        .group_by("traverse")
        .agg(points=pl.len(), mean_v=pl.col("v").mean(), rho=pl.col("rho").mean(), vmax=pl.col("v").max(),
             d=pl.col("diameter_mm").first(), reversed=(pl.col("dp") < 0).sum())
        .with_columns(q=pl.col("mean_v") * math.pi * (pl.col("d") / 1000.0) ** 2 / 4.0)
        .with_columns(m=pl.col("q") * pl.col("rho"), flatness=pl.col("mean_v") / pl.col("vmax"))
        .sink_parquet(out)
    )
    t = pl.scan_parquet(out).select(pl.len(), pl.col("points").sum()).collect()
    print(f"RESULT n={t[0, 0]} q=0 m=0 points={t[0, 1]}")


def peer_pandas(path):
    import numpy as np
    import pandas as pd

    if path.endswith(".parquet"):
        df = pd.read_parquet(path, columns=USED)
    else:
        df = pd.read_csv(path, usecols=USED, engine="pyarrow")
    rho, dp, v = physics(
        df["fluid_temp_c"].to_numpy(), df["deflection_mm"].to_numpy(), np.exp, np.sqrt, np.abs, np.sign
    )
    g = pd.DataFrame({"traverse": df["traverse"].to_numpy(), "v": v, "rho": rho, "neg": dp < 0, "d": df["diameter_mm"].to_numpy()})
    t = g.groupby("traverse", sort=False).agg(
        points=("v", "size"), mean_v=("v", "mean"), rho=("rho", "mean"), vmax=("v", "max"), d=("d", "first"), reversed=("neg", "sum")
    )
    t["q"] = t["mean_v"] * math.pi * (t["d"] / 1000.0) ** 2 / 4.0
    t["m"] = t["q"] * t["rho"]
    t["flatness"] = t["mean_v"] / t["vmax"]
    print(f"RESULT n={len(t)} q={t['q'].sum()} m={t['m'].sum()} points={t['points'].sum()}")


def measured(cmd):
    """Runs `cmd` and returns (wall s, peak RSS MiB of that process, its RESULT line)."""
    t0 = time.perf_counter()
    p = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL)
    out = p.stdout.read()
    p.stdout.close()
    _, status, ru = os.wait4(p.pid, 0)  # this child's own rusage (ru_maxrss in KiB on Linux)
    p.returncode = os.waitstatus_to_exitcode(status)
    wall = time.perf_counter() - t0
    if p.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)} failed (exit {p.returncode})")
    line = next((l for l in out.decode().splitlines() if l.startswith("RESULT")), None)
    if line is None:
        raise SystemExit(f"{' '.join(cmd)} printed no RESULT line:\n{out.decode()[-2000:]}")
    return wall, ru.ru_maxrss / 1024.0, line


def parse(line):
    kv = dict(p.split("=") for p in line.split()[1:])
    return int(float(kv["n"])), float(kv["q"]), float(kv["m"]), int(float(kv["points"]))


def main():
    if len(sys.argv) > 1 and sys.argv[1] == "peer-polars":
        return peer_polars(sys.argv[2], sys.argv[3])
    if len(sys.argv) > 1 and sys.argv[1] == "peer-pandas":
        return peer_pandas(sys.argv[2])
    if len(sys.argv) > 1 and sys.argv[1] == "peer-polars-sink":
        return peer_polars_sink(sys.argv[2], sys.argv[3])
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--stagna", required=True)
    ap.add_argument("--sizes", default="1e6,1e7")
    ap.add_argument("--formats", default="parquet,csv")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--dir", default=None)
    ap.add_argument("--large", default="0", help="also reduce a folder of this many readings (e.g. 2e8) into a Parquet file")
    a = ap.parse_args()
    import numpy, pandas, polars

    print(f"python {sys.version.split()[0]}, polars {polars.__version__}, pandas {pandas.__version__}, numpy {numpy.__version__}")
    print(f"machine: {os.cpu_count()} logical CPUs; {time.strftime('%Y-%m-%d %H:%M %Z')}")
    work = a.dir or tempfile.mkdtemp(prefix="stagna-peers-")
    os.makedirs(work, exist_ok=True)
    scripts = {}
    for route in ["scan", "read", "sink"]:
        p = os.path.join(work, f"reduce-{route}.rhai")
        with open(p, "w") as f:
            f.write(STAGNA_SCRIPT.replace("ROUTE", f'"{route}"'))
        scripts[route] = p
    py = sys.executable
    results = {}
    for size in [int(float(s)) for s in a.sizes.split(",")]:
        for fmt in a.formats.split(","):
            path = os.path.join(work, f"campaign-{size}.{fmt}")
            if not os.path.exists(path):
                make_campaign(size, path)
            raw = size * len(USED) * 8
            out = os.path.join(work, "out")
            contestants = {
                "stagna-scan": [a.stagna, "run", scripts["scan"], path, "-o", out],
                "stagna-read": [a.stagna, "run", scripts["read"], path, "-o", out],
                "polars-lazy": [py, __file__, "peer-polars", path, "in-memory"],
                "polars-stream": [py, __file__, "peer-polars", path, "streaming"],
                "pandas": [py, __file__, "peer-pandas", path],
            }
            times = {k: [] for k in contestants}
            rss = {k: [] for k in contestants}
            sums = {}
            # The file in the page cache before the first contestant (a cold first read is
            # the disk's time, not a contestant's).
            with open(path, "rb") as f:
                while f.read(1 << 24):
                    pass
            for r in range(a.repeat):
                # Another order each round: a process started just after a 3 GB one exited took
                # 1.39-1.95 s where it took 1.08-1.21 s after an idle moment on the 2-vCPU VM
                # (system time doubled), so no contestant may always follow the same one.
                # Round r takes every step-th contestant from the r-th, with steps coprime to
                # their number: within a round each follows another one than in the round
                # before, until the steps repeat.
                names = list(contestants)
                k = len(names)
                steps = [st for st in range(1, k) if math.gcd(st, k) == 1] or [1]
                step = steps[r % len(steps)]
                order = [names[(r + j * step) % k] for j in range(k)]
                for name in order:
                    cmd = contestants[name]
                    w, m, line = measured(cmd)
                    times[name].append(w)
                    rss[name].append(m)
                    sums[name] = parse(line)
            ref = sums["stagna-scan"]
            for name, s in sums.items():
                agree = s[0] == ref[0] and s[3] == ref[3] and abs(s[1] - ref[1]) <= 1e-8 * abs(ref[1]) and abs(s[2] - ref[2]) <= 1e-8 * abs(ref[2])
                if not agree:
                    print(f"  !! {name} disagrees: {s} vs {ref}")
            med = {k: statistics.median(v) for k, v in times.items()}
            results[(size, fmt)] = med
            best_polars = min(med["polars-lazy"], med["polars-stream"])
            print(f"\n{size:,} readings, {fmt} ({os.path.getsize(path) / 2**20:.0f} MiB on disk; raw bytes of the 6 columns used {raw / 2**20:.0f} MiB); median of {a.repeat}, order varied each round")
            print(f"  {'contestant':<14} {'wall s':>8} {'peak MiB':>9} {'peak/raw':>9} {'stagna-scan is':>16}")
            for k in contestants:
                print(f"  {k:<14} {med[k]:8.3f} {max(rss[k]):9.0f} {max(rss[k]) * 2**20 / raw:9.2f} {med[k] / med['stagna-scan']:14.2f}×")
            print(f"  goals: ≥ 2× best python-polars: {best_polars / med['stagna-scan']:.2f}×; ≥ 5× pandas: {med['pandas'] / med['stagna-scan']:.2f}×; peak ≤ 0.5× raw: {max(rss['stagna-scan']) * 2**20 / raw:.2f}×")
    large = int(float(a.large))
    if large:
        folder = os.path.join(work, f"campaign-{large}")
        step = 10_000_000
        if not os.path.isdir(folder):
            os.makedirs(folder)
            for i, lo in enumerate(range(0, large, step)):
                make_campaign(min(step, large - lo), os.path.join(folder, f"part-{i:04}.parquet"), first=lo // 20, seed=i)
        disk = sum(os.path.getsize(os.path.join(folder, f)) for f in os.listdir(folder))
        raw = large * len(USED) * 8
        print(f"\nlarger than memory: {large:,} readings in {len(os.listdir(folder))} Parquet files ({disk / 2**20:.0f} MiB on disk; raw bytes of the columns used {raw / 2**30:.1f} GiB), straight into a Parquet file of traverses")
        # The same route over one 10 M-reading file first, for the cost per reading.
        ten = os.path.join(work, "campaign-10000000.parquet")
        if not os.path.exists(ten):
            make_campaign(10_000_000, ten)
        w, m, line = measured([a.stagna, "run", scripts["sink"], "--set", f"source={ten}", "-o", os.path.join(work, "out-ten")])
        ref = w / 10_000_000 * 1e9
        print(f"  stagna-sink over 10,000,000 readings (one file): {w:.2f} s, peak {m:.0f} MiB, {ref:.1f} ns a reading")
        for name, cmd in {
            "stagna-sink": [a.stagna, "run", scripts["sink"], "--set", f"source={folder}", "-o", os.path.join(work, "out-large")],
            "polars-sink": [py, __file__, "peer-polars-sink", folder, os.path.join(work, "polars-large.parquet")],
        }.items():
            w, m, line = measured(cmd)
            n, _, _, pts = parse(line)
            per_reading = w / large * 1e9
            scale = f"; {per_reading:.1f} ns a reading" + (f" ({per_reading / ref:.2f}× the 10 M-reading run's)" if name == "stagna-sink" else "")
            print(f"  {name:<12} {w:8.1f} s  peak {m:7.0f} MiB  {n:,} traverses, {pts:,} readings{scale}")
    sizes = sorted({s for s, _ in results})
    if len(sizes) >= 2:
        lo, hi = sizes[0], sizes[-1]
        for fmt in a.formats.split(","):
            r = results[(hi, fmt)]["stagna-scan"] / results[(lo, fmt)]["stagna-scan"]
            print(f"\nscaling, {fmt}: {hi:,} / {lo:,} readings took {r:.1f}× the time (linear: {hi / lo:.0f}×; goal ≤ {1.1 * hi / lo:.0f}×)")


if __name__ == "__main__":
    main()
