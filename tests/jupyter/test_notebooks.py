"""Every stagna notebook in demo-notebooks/ executed by nbclient, with key outputs asserted."""

import json
import pathlib
import re

import nbformat
import pytest
from nbclient import NotebookClient

ROOT = pathlib.Path(__file__).resolve().parents[2]
NOTEBOOKS = sorted(
    p for p in (ROOT / "demo-notebooks").glob("*.ipynb")
    if json.loads(p.read_text())["metadata"]["kernelspec"]["name"] == "stagna"
)

# Key outputs per notebook: regular expressions over the text of all outputs, with the
# source of each expected value.
EXPECT = {
    # 09:00 reading: iapws 1.5.5 water 999.9328 kg/m³, Δp 5117.38 Pa, v 3.19929 m/s (see the e2e demo test).
    "01-water-main-single-point.ipynb": [r"= 5117\.38 Pa", r"= 3\.19929 m/s", r"centreline velocity 3\.209 m/s",
                                         r"power law, n = ", r"log law, κ = 0\.41", r"L/s \(power law\)"],
    # Equal-area point 1 on 600 mm: 2.6 % of D = 15.4 mm (US EPA Method 1 Table 1-1); Q = v̄·πD²/4.
    "02-duct-traverse-layout-to-flow.ipynb": [r"A1\s+15\.4", r"mean velocity 13\.23\d* m/s", r"volume flow 1346\d(\.\d+)? m³/h"],
    # M_s ≈ 28.61 g/mol by US EPA Methods 2 and 3; the Rust reduction within 0.1 % of the Method 2 equation.
    # The run sheets by the methods' equations (Method 4 moisture, checks with numbers).
    "03-stack-traverse-s-type.ipynb": [r"S-type calibration SP-07 of 2026-09-22", r"Method 4 moisture: ", r"all method checks passed: true", r"Stack run R3"],
    "04-profile-study.ipynb": [r"x02D", r"x30D", r"power law, n = 7"],
    # Shares of the budget add to 100 %; Monte Carlo interval printed.
    # Generated from a 1/7 power-law profile of 1.50 m/s mean (demo-data/make-gloomwater-logged.py);
    # 300 samples at 5 Hz per point, 8 s settling drops 40. The local corrections make a factor
    # a little below 1 (turbulence about 4 % from the samples, displacement and wall for a 5 mm
    # head) and say which coefficients are recalled.
    "07-logged-traverse-measured-budget.ipynb": [r"mean velocity 1\.50\d m/s \(corrected\)", r"mean factor 0\.99\d+",
                                                 r"\(from memory, unverified\)", r"local corrections\s+0\.99",
                                                 r"P01\s+260\s+40", r"Type A from the logged samples",
                                                 r"Monte Carlo \(JCGM 101:2008\): \d+ trials, adaptive procedure"],
    "05-traverse-uncertainty-budget.ipynb": [r"U = 0\.057 m³/s \(expanded, k = 1\.96, 95 %", r"Monte Carlo \(JCGM 101:2008\): \d+ trials, adaptive procedure", r"Verdict: the GUM interval", r"GUM: Q = 3\.74\d* m³/s"],
}


def outputs_text(nb):
    parts, mimes = [], set()
    for cell in nb.cells:
        for o in cell.get("outputs", []):
            if o.get("output_type") == "stream":
                parts.append(o.get("text", ""))
            elif o.get("output_type") in ("execute_result", "display_data"):
                data = o.get("data", {})
                mimes.update(data.keys())
                parts.append(data.get("text/plain", ""))
                parts.append(data.get("image/svg+xml", ""))
            elif o.get("output_type") == "error":
                raise AssertionError(f"cell failed: {o.get('ename')}: {o.get('evalue')}")
    return "\n".join(parts), mimes


@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.name for p in NOTEBOOKS])
def test_notebook_runs_with_expected_outputs(path):
    nb = nbformat.read(path, as_version=4)
    NotebookClient(nb, kernel_name="stagna", timeout=120, resources={"metadata": {"path": str(path.parent)}}).execute()
    text, mimes = outputs_text(nb)
    for pattern in EXPECT[path.name]:
        assert re.search(pattern, text), f"{path.name}: no match for {pattern!r}"
    assert "text/plain" in mimes
    if path.name != "01-water-main-single-point.ipynb":
        assert "image/svg+xml" in mimes or "text/html" in mimes, f"{path.name}: no rich output"


def test_every_stagna_notebook_has_expectations():
    assert NOTEBOOKS and all(p.name in EXPECT for p in NOTEBOOKS)


RUST_NOTEBOOK = ROOT / "demo-notebooks" / "06-rust-library-evcxr.ipynb"


def test_rust_notebook_runs_under_evcxr():
    """The Rust notebook under the evcxr kernel that tests/run-all installs (kernelspec "rust")."""
    from jupyter_client.kernelspec import KernelSpecManager

    specs = KernelSpecManager().find_kernel_specs()
    assert "rust" in specs, f"no 'rust' kernelspec (tests/run-all installs evcxr_jupyter); found {sorted(specs)}"
    nb = nbformat.read(RUST_NOTEBOOK, as_version=4)
    # The first cell builds the library inside the kernel (minutes from a clean folder).
    NotebookClient(
        nb, kernel_name="rust", timeout=1500, resources={"metadata": {"path": str(RUST_NOTEBOOK.parent)}}
    ).execute()
    text, mimes = outputs_text(nb)
    latex = "\n".join(o.get("data", {}).get("text/latex", "") for c in nb.cells for o in c.get("outputs", []))
    assert "image/svg+xml" in mimes and "text/latex" in mimes, mimes
    assert "Optimization: 0" in text
    # 12 points per diameter, equal areas: 2.1, 6.7, 11.8, 17.7, 25.0, 35.6 % of D from the wall
    # (US EPA Method 1 Table 1-1, check-values.md §5.1); on 1500 mm the first is 31.9 mm, and
    # the insertion adds the 150 mm port.
    for point, pct in [("A1", "2.1"), ("A2", "6.7"), ("A3", "11.8"), ("A4", "17.7"), ("A5", "25.0"), ("A6", "35.6")]:
        assert re.search(rf"{point}\s+[\d.]+\s+{re.escape(pct)}\s", text), f"{point} at {pct} % of D"
    assert re.search(r"A1\s+31\.9\s+2\.1\s+181\.9", text)
    assert "<svg" in text and "equal-area layout, 2 line(s) × 12 points" in text
    # Humid air at 100.8 kPa, 21 °C, 45 % RH: ideal-gas estimate ρ = p/(R_d T)·(1 − 0.378 e/p)
    # with e = 0.45·e_s(21 °C), e_s = 611.2·exp(17.62 t/(243.12 + t)) Pa (Magnus, WMO-No. 8
    # Annex 4.B), R_d = 287.058 J/(kg·K): 1.1888 kg/m³; the CIPM-2007 density the library
    # prints differs by its compressibility Z ≈ 0.9996, under 0.1 %.
    import math

    t, p = 21.0, 100_800.0
    e = 0.45 * 611.2 * math.exp(17.62 * t / (243.12 + t))
    rho_est = p / (287.058 * (t + 273.15)) * (1 - 0.378 * e / p)
    rho = float(re.search(r"100800 Pa / ([\d.]+) kg/m³", text).group(1))
    assert abs(rho / rho_est - 1) < 1e-3, (rho, rho_est)
    # ISO 3966 compressible pitot equation (isentropic, γ = 1.4) evaluated here with that ρ.
    g, c, dp = 1.4, 0.998, 118.0
    v = math.sqrt(2 * g / (g - 1) * p / rho * ((1 + c * c * dp / p) ** ((g - 1) / g) - 1))
    shown = re.search(r"= ([\d.]+) m/s\n   source: isentropic", text).group(1)
    assert abs(float(shown) - v) < 1e-4 * v, (shown, v)
    # The same steps as LaTeX, with the same value.
    assert rf"\mathbf{{{shown}\ \mathrm{{m/s}}}}" in latex, latex
