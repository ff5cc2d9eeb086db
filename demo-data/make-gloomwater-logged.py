"""Writes gloomwater-cw-logged.csv: an invented logged traverse (Gloomwater Works, a
fictional plant; DN300 cooling-water return). A pitot-static probe at the 10 equal-area
points of one diameter, a Δp transducer logged at 5 Hz for 60 s per point, the first
seconds of each block settling after the probe was moved. The flow behind it: a 1/7
power-law profile of 1.50 m/s mean velocity, Δp = ½ρv² with ρ = 997.3 kg/m³ (water at
24 °C), turbulent fluctuation of about 4 % of the velocity (AR(1) at 5 Hz, φ = 0.8), and
transducer noise of 1.5 Pa. Seeded: rerunning gives the same file."""

import math
import random

random.seed(20261204)
D, n_pts, mean_v, rho = 0.300, 10, 1.50, 997.3
n = 7.0
ratio = 2 * n * n / ((n + 1) * (2 * n + 1))  # mean / centreline for a power law
v_c = mean_v / ratio
rows = ["point,insertion_mm,time_s,dp_pa,water_temp_c"]
t = 0.0
for i in range(n_pts):
    # Equal-area positions on one diameter (US EPA Method 1 / ISO 3966 equal-area rule).
    half = n_pts // 2
    k = half - 1 - i if i < half else i - half
    r = math.sqrt((2 * k + 1) / (2 * half)) * D / 2
    insertion = D / 2 - r if i < half else D / 2 + r
    y_from_wall = D / 2 - r
    v = v_c * (y_from_wall / (D / 2)) ** (1 / n)
    prev = 0.0
    start = t
    for s in range(300):
        e = random.gauss(0, 1)
        prev = 0.8 * prev + math.sqrt(1 - 0.8 ** 2) * e
        settle = 1.0 + 0.15 * math.exp(-(t - start) / 1.5)  # the probe was just moved
        vi = v * settle * (1 + 0.04 * prev)
        dp = 0.5 * rho * vi * abs(vi) + random.gauss(0, 1.5)
        temp = 24.0 + 0.05 * math.sin(t / 40.0)
        rows.append(f"P{i + 1:02d},{insertion * 1000:.1f},{t:.1f},{dp:.2f},{temp:.2f}")
        t += 0.2
    t += 40.0  # moving the probe to the next point
open("gloomwater-cw-logged.csv", "w").write("\n".join(rows) + "\n")
