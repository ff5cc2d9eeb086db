#!/usr/bin/env python3
"""Batch-runner overhead per input file (prints figures, asserts nothing).

N small inputs (one 20-reading traverse each) are reduced twice by the same script body:
once by `stagna run SCRIPT FILES... -j 1` (one input after another, as the runner does:
session start-over, output folder, manifest entry, captured output), once by one script that
loops over the same files in one session. Both are one process; the difference over N is
what the runner adds to each file beyond the script's own work.

Usage: python bench/batch_overhead.py --stagna target/release/stagna [--files 500] [--repeat 3]
"""

import argparse
import os
import statistics
import subprocess
import tempfile
import time

BODY = r"""
fn reduce_one(path) {
    let t = read_table(path).units(#{h: "mm", t: "degC", d: "mm", y: "mm"});
    let spec = #{fluid: dry_air(), static_pressure: 101.kPa, manometer: u_tube(gauge_water()),
        probe: pitot_static(0.99), columns: #{traverse: "tr", deflection: "h", fluid_temperature: "t", size: "d", position: "y"}};
    reduce_campaign(t, spec).traverses["volume_flow_m3_s"].sum().value
}
"""


def wall(cmd):
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - t0


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--stagna", required=True)
    ap.add_argument("--files", type=int, default=500)
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    d = tempfile.mkdtemp(prefix="stagna-batch-")
    files = []
    for i in range(a.files):
        f = os.path.join(d, "in", f"run-{i:05}.csv")
        os.makedirs(os.path.dirname(f), exist_ok=True)
        with open(f, "w") as out:
            out.write("tr,h,t,d,y\n")
            for k in range(20):
                y = 12.5 + 25.0 * k
                out.write(f"{i},{20 + (k % 5) + i % 3},{18 + i % 4},500,{y}\n")
        files.append(f)
    one = os.path.join(d, "one.rhai")
    with open(one, "w") as s:
        s.write(BODY + "print(reduce_one(input));\n")
    loop = os.path.join(d, "loop.rhai")
    with open(loop, "w") as s:
        s.write(BODY + "for f in [" + ", ".join(f'"{f}"' for f in files) + "] { print(reduce_one(f)); }\n")
    batch, looped = [], []
    for r in range(a.repeat):
        batch.append(wall([a.stagna, "run", one, *files, "-o", os.path.join(d, f"out-b{r}"), "-j", "1"]))
        looped.append(wall([a.stagna, "run", loop, "-o", os.path.join(d, f"out-l{r}")]))
    b, l = statistics.median(batch), statistics.median(looped)
    print(f"\nbatch runner, {a.files} inputs of 20 readings, one worker, median of {a.repeat}:")
    print(f"  stagna run SCRIPT FILES... -j 1   {b * 1000:8.0f} ms  ({b / a.files * 1000:.2f} ms a file)")
    print(f"  one script looping over the files {l * 1000:8.0f} ms  ({l / a.files * 1000:.2f} ms a file)")
    print(f"  overhead of the runner per file: {(b - l) / a.files * 1000:.3f} ms (goal ≤ 0.5 ms)")


if __name__ == "__main__":
    main()
