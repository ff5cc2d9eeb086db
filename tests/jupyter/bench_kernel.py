"""Kernel speed, by hand (not a test): start-up until the kernel_info reply and a trivial
cell's round trip, for stagna and for the stock Python kernel (ipykernel) in the same run.

    pip install ipykernel jupyter_client
    python tests/jupyter/bench_kernel.py            # kernelspecs 'stagna' and 'python3'
"""

import statistics
import sys
import time

from jupyter_client import KernelManager


def measure(name, starts=5, cells=200):
    start_times, trips = [], []
    for _ in range(starts):
        km = KernelManager(kernel_name=name)
        t0 = time.perf_counter()
        km.start_kernel()
        kc = km.client()
        kc.start_channels()
        # Start until the kernel_info reply (the request waits in ZeroMQ until the kernel binds);
        # wait_for_ready would add its own fixed iopub flush delay.
        kc.kernel_info()
        kc.get_shell_msg(timeout=60)
        start_times.append(time.perf_counter() - t0)
        kc.wait_for_ready(timeout=60)
        if not trips:
            code = "1 + 1"
            for _ in range(cells):
                t1 = time.perf_counter()
                kc.execute_interactive(code, timeout=30, output_hook=lambda m: None)
                trips.append(time.perf_counter() - t1)
        kc.stop_channels()
        km.shutdown_kernel(now=True)
    return min(start_times), statistics.median(start_times), statistics.median(trips)


def main():
    names = sys.argv[1:] or ["stagna", "python3"]
    rows = {n: measure(n) for n in names}
    for n, (best, med, trip) in rows.items():
        print(f"{n:8s} start to kernel_info reply: best {best*1e3:7.1f} ms, median {med*1e3:7.1f} ms; trivial cell round trip median {trip*1e3:6.2f} ms")
    if "stagna" in rows and "python3" in rows:
        s, p = rows["stagna"], rows["python3"]
        print(f"start-up: python3 / stagna = {p[1] / s[1]:.1f}x (goal >= 10x); round trip: stagna / python3 = {s[2] / p[2]:.2f} (goal <= 1)")


if __name__ == "__main__":
    main()
