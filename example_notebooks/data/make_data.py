"""Write soil_pits.csv: invented soil-profile analyses from six fictional farms.

Run from anywhere: ``python example_notebooks/data/make_data.py``. The output is
deterministic (fixed seed, fixed formatting); only numpy and the standard
library are used. Every farm, pit and value is invented (see README.md).
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

SEED = 20240611
OUT = Path(__file__).with_name("soil_pits.csv")

MAJORS = ["SiO2", "TiO2", "Al2O3", "Fe2O3", "MnO", "MgO", "CaO", "Na2O", "K2O", "P2O5", "LOI"]
TRACES = ["Zn", "Cu", "Pb", "Cd"]
PARTS = MAJORS + TRACES
N_MAJ = len(MAJORS)
DETECTION_LIMITS = {"MnO": 0.01, "P2O5": 0.01, "Zn": 2.0, "Cu": 1.0, "Pb": 2.0, "Cd": 0.1}
TO_WT = np.array([1.0] * N_MAJ + [1e-4] * len(TRACES))  # ppm -> wt%

# Invented farms: code, name, parent material (C-horizon mean: majors wt%, traces ppm).
FARMS = [
    ("PEN", "Pennock Farm", "silt over chalk",
     [62.0, 0.70, 10.0, 3.8, 0.06, 0.9, 8.0, 0.8, 1.9, 0.10, 9.0, 60, 15, 20, 0.30]),
    ("LAR", "Larchhollow", "acid sand",
     [90.0, 0.25, 3.5, 1.0, 0.007, 0.15, 0.20, 0.15, 0.9, 0.009, 2.5, 15, 4, 12, 0.12]),
    ("GRM", "Greyling Mains", "alluvial clay",
     [55.0, 0.95, 19.0, 7.5, 0.10, 1.6, 1.0, 0.7, 2.8, 0.15, 9.5, 110, 30, 30, 0.35]),
    ("SOW", "Sowden End", "basaltic till",
     [49.0, 1.90, 14.5, 11.5, 0.17, 5.5, 6.0, 2.0, 0.9, 0.25, 7.0, 120, 60, 15, 0.25]),
    ("BRX", "Brindle Cross", "loam beside an old road",
     [68.0, 0.65, 12.0, 4.2, 0.07, 1.0, 1.2, 1.0, 2.2, 0.12, 6.0, 80, 20, 35, 0.30]),
    ("ORK", "Orchard Knap", "loam under old orchard",
     [66.0, 0.70, 12.5, 4.5, 0.08, 1.1, 1.5, 1.1, 2.3, 0.14, 6.5, 75, 25, 25, 0.30]),
]  # fmt: skip
# Depth intervals (cm) and horizon labels, top to bottom.
INTERVALS = [(0, 10, "A"), (10, 25, "A"), (25, 45, "B"), (45, 70, "B"), (70, 100, "C")]
PITS_PER_FARM = 5

# Log-enrichment at the surface (decays with depth), per part; farm extras below.
SURFACE = dict.fromkeys(PARTS, 0.0) | {"LOI": 1.1, "P2O5": 0.9, "MnO": 0.3, "Zn": 0.3, "Cd": 0.5}
FARM_SURFACE = {
    "PEN": {"CaO": -1.2},  # topsoil leached of carbonate
    "BRX": {"Pb": 2.3, "Zn": 1.2, "Cd": 0.8},  # road-side input, invented
    "ORK": {"Cu": 2.0},  # old orchard sprays, invented
}
NOISE_SD = dict.fromkeys(MAJORS, 0.06) | {"MnO": 0.2, "P2O5": 0.2, "LOI": 0.12}
NOISE_SD |= {"Zn": 0.15, "Cu": 0.2, "Pb": 0.2, "Cd": 0.3}


def fmt(value: float, part: str) -> str:
    """Lab-style text: 3 dp for MnO and P2O5, 2 dp for other wt% and Cd, else whole ppm."""
    if part in ("MnO", "P2O5"):
        return f"{value:.3f}"
    if part in MAJORS or part == "Cd":
        return f"{value:.2f}"
    return f"{value:.0f}"


def main() -> None:
    rng = np.random.default_rng(SEED)
    sd = np.array([NOISE_SD[p] for p in PARTS])
    header = ["sample_id", "farm", "pit", "horizon", "depth_top (cm)", "depth_bottom (cm)"]
    header += [f"{p} (wt%)" for p in MAJORS] + [f"{p} (ppm)" for p in TRACES]
    rows: list[list[str]] = []
    for code, name, _parent, means in FARMS:
        log_parent = np.log(np.array(means) * TO_WT)
        surface = np.array([SURFACE[p] + FARM_SURFACE.get(code, {}).get(p, 0.0) for p in PARTS])
        for pit in range(1, PITS_PER_FARM + 1):
            pit_effect = rng.normal(0.0, 0.05, len(PARTS))
            for top, bottom, horizon in INTERVALS:
                mid = 0.5 * (top + bottom)
                log_x = log_parent + pit_effect + surface * np.exp(-mid / 18.0)
                log_x = log_x + rng.normal(0.0, sd)
                comp = np.exp(log_x)
                total = float(np.clip(rng.normal(100.0, 0.4), 99.0, 101.0))
                comp *= total / comp.sum()
                values = comp / TO_WT
                row = [
                    f"{code}{pit:02d}-{top:03d}",
                    name,
                    f"P{pit}",
                    horizon,
                    str(top),
                    str(bottom),
                ]
                for j, part in enumerate(PARTS):
                    text = fmt(values[j], part)
                    limit = DETECTION_LIMITS.get(part)
                    if limit is not None and float(text) < limit:
                        text = f"<{limit:g}"
                    row.append(text)
                rows.append(row)

    column = {name: 6 + j for j, name in enumerate(PARTS)}
    # Cd not analysed for one pit; two stray blanks; a few "bdl" spellings.
    for row in rows:
        if row[0].startswith("GRM04-"):
            row[column["Cd"]] = ""
    rows[37][column["Pb"]] = ""
    rows[118][column["Zn"]] = ""
    for row in rows:
        for part in ("Cd", "MnO", "P2O5"):
            if row[column[part]].startswith("<") and row[0][3:5] in ("02", "04"):
                row[column[part]] = "bdl"
    # Two rows with a low analytical total (e.g. a sample lost in fusion).
    for i, factor in ((52, 0.945), (131, 0.952)):
        for part in MAJORS:
            j = column[part]
            if not rows[i][j].startswith("<") and rows[i][j] not in ("", "bdl"):
                rows[i][j] = fmt(float(rows[i][j]) * factor, part)

    with OUT.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(header)
        writer.writerows(rows)
    print(f"wrote {len(rows)} rows to {OUT}")


if __name__ == "__main__":
    main()
