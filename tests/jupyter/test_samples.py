"""Logged-sample statistics (`sample_stats`) against numpy on generated signals with
known properties: white noise (n_eff = n) and AR(1) noise, whose effective number of
independent samples for the mean tends to n(1 − φ)/(1 + φ) (variance of the mean of a
stationary AR(1) series; standard time-series result, from memory). numpy recomputes every
statistic from the same samples with the formulas documented in lib/src/campaign/samples.rs,
so the two must agree to rounding; the theory checks the estimator itself."""

import os
import pathlib
import subprocess

import numpy as np
import pytest

ROOT = pathlib.Path(__file__).resolve().parents[2]


def stagna_bin():
    b = os.environ.get("STAGNA_BIN")
    assert b, "STAGNA_BIN is set by tests/run-all"
    return b


def ar1(rng, n, phi):
    e = rng.standard_normal(n)
    x = np.empty(n)
    prev = 0.0
    scale = np.sqrt(1.0 - phi * phi)
    for i in range(n):
        prev = phi * prev + scale * e[i]
        x[i] = prev
    return x


def numpy_stats(t, x, settle):
    """The documented formulas, in numpy."""
    keep = (t - t[0]) >= settle
    x = x[keep]
    n = len(x)
    mean = x.mean()
    sd = x.std(ddof=1)
    ssqrt = np.sign(x) * np.sqrt(np.abs(x))
    i = np.arange(n, dtype=float)
    c = (n - 1) / 2.0
    slope = np.sum((i - c) * (x - mean)) / np.sum((i - c) ** 2)
    f = x - mean - slope * (i - c)
    fss = np.sum(f * f)
    total = 0.0
    for k in range(1, min(2000, n - 1) + 1):
        r = np.dot(f[: n - k], f[k:]) / fss
        if r <= 0:
            break
        total += (1 - k / n) * r
    n_eff = min(max(n / (1 + 2 * total), 1.0), n)
    return {
        "n": n, "dropped": int((~keep).sum()), "mean_dp": mean, "sd_dp": sd,
        "mean_sqrt_dp_sqrtPa": ssqrt.mean(), "negative_pct": 100.0 * (x < 0).mean(),
        "n_effective": n_eff, "u_mean_dp": sd / np.sqrt(n_eff),
    }


def test_sample_stats_match_numpy_and_theory(tmp_path):
    rng = np.random.default_rng(20261203)
    n, dt, settle = 20000, 0.01, 5.0
    cases = {"W1": (0.0, 120.0, 3.0), "R5": (0.5, 95.0, 4.0), "R9": (0.9, 60.0, 2.0), "NEG": (0.0, 4.0, 6.0)}
    rows, signals = [], {}
    t0 = 0.0
    for pid, (phi, mean, sd) in cases.items():
        x = mean + sd * ar1(rng, n, phi)
        t = t0 + dt * np.arange(n)
        signals[pid] = (t, x)
        rows += [f"{pid},{float(ti)!r},{float(xi)!r}" for ti, xi in zip(t, x)]
        t0 = t[-1] + 30.0
    csv = tmp_path / "samples.csv"
    csv.write_text("point,time_s,dp_pa\n" + "\n".join(rows) + "\n")
    script = tmp_path / "stats.rhai"
    script.write_text(
        f'let s = read_csv("{csv}").unit("dp_pa", "Pa");\n'
        f'let st = sample_stats(s, #{{dp: "dp_pa", settle: {settle}.s}});\n'
        f'st.write("{tmp_path / "stats.csv"}");\n'
    )
    r = subprocess.run([stagna_bin(), "run", str(script), "-o", str(tmp_path)], capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    # The checks speak up: the point whose signal crosses zero is flagged as reversing.
    assert "point NEG:" in r.stderr and "negative" in r.stderr, r.stderr
    lines = (tmp_path / "stats.csv").read_text().splitlines()
    head = lines[0].split(",")
    got = {}
    for line in lines[1:]:
        cells = line.split(",")
        got[cells[0]] = dict(zip(head, cells))
    for pid, (t, x) in signals.items():
        want = numpy_stats(t, x, settle)
        g = got[pid]
        assert int(g["n"]) == want["n"] and int(g["dropped"]) == want["dropped"] == 500, (pid, g)
        for k in ["mean_dp", "sd_dp", "mean_sqrt_dp_sqrtPa", "negative_pct", "n_effective", "u_mean_dp"]:
            assert float(g[k]) == pytest.approx(want[k], rel=1e-9, abs=1e-12), (pid, k, g[k], want[k])
        phi = cases[pid][0]
        theory = want["n"] * (1 - phi) / (1 + phi)
        assert float(g["n_effective"]) == pytest.approx(theory, rel=0.2), (pid, g["n_effective"], theory)
