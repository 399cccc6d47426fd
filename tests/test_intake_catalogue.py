"""A catalogue of hostile and messy tables, each read right or refused by name.

Every table here is invented. For each one the test states the outcome by
hand (parts, metadata, row labels, report entries with their codes, flags;
or the error type and the place it names), checks that the caller's frame
(or file) is unchanged, and checks that every input cell is accounted for:
kept, converted, replaced, flagged, or in a column reported as metadata or
row labels (:func:`assert_accounted`).

Unit factors used for the checks: 1 wt% = 10,000 ppm, 1 ppm = 1,000 ppb,
mg/kg = ug/g = ppm (common practice).
"""

from __future__ import annotations

import copy
import datetime
import re
import zipfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest

from compwidgets.composition import OBSERVED
from compwidgets.core import CompositionError
from compwidgets.intake import read_composition

#: ppm per unit (common practice), for the conservation check.
PPM_PER = {"wt%": 1e4, "%": 1e4, "ppm": 1.0, "mg/kg": 1.0, "ug/g": 1.0, "µg/g": 1.0, "ppb": 1e-3}
#: Report actions that name one cell of a part column.
CELL_ACTIONS = {"parsed_text", "missing", "below_detection", "negative_as_below_detection"}


def _header_text(c) -> str:
    if isinstance(c, tuple):
        return " ".join(str(x) for x in c)
    return c if isinstance(c, str) else str(c)


def _same_cells(a, b) -> bool:
    a = pd.Series(np.asarray(a, dtype=object))
    b = pd.Series(np.asarray(b, dtype=object))
    both_na = a.isna().to_numpy() & b.isna().to_numpy()
    return bool(np.all(both_na | (a.astype(str).to_numpy() == b.astype(str).to_numpy())))


def assert_accounted(table: pd.DataFrame, comp) -> None:
    """Every input cell is kept, converted, replaced, flagged or in a metadata/label column."""
    account = comp.column_account
    names = [_header_text(c) for c in table.columns]
    assert [str(x).strip() for x in account.index] == [n.strip() for n in names]
    assert set(account["role"]) <= {"part", "metadata", "index"}
    assert (account["role"] == "index").sum() <= 1
    assert len(comp.values) == len(table)  # no row dropped
    columns = comp.report[comp.report["action"] == "column"]
    assert list(columns["column"]) == list(account.index)  # one report entry per column
    assert list(columns["code"]) == list(account["code"])
    report = comp.report
    cell_entries = report[report["action"].isin(CELL_ACTIONS)]
    reported = set(zip(cell_entries["row"], cell_entries["column"], strict=True))
    labels = list(comp.values.index)
    for pos, (name, row) in enumerate(account.iterrows()):
        given = table.iloc[:, pos]
        if row["role"] == "metadata":
            assert _same_cells(comp.metadata[name], given), name
        elif row["role"] == "index":
            assert _same_cells(comp.values.index, given), name
            assert comp.values.index.name == name
        else:
            part = row["part"]
            unit = row["unit"] or comp.units[part]
            factor = PPM_PER[unit] / PPM_PER[comp.unit] if comp.unit != "count" else 1.0
            status = comp.status[part].to_numpy()
            raw = comp.raw[part].to_numpy()
            for i, cell in enumerate(given.tolist()):
                if (labels[i], part) in reported:
                    continue
                # not reported: a plain number kept, in the common unit
                assert status[i] == OBSERVED, (name, labels[i], cell)
                assert raw[i] == pytest.approx(float(cell) * factor, rel=1e-12), (name, cell)
    # replaced cells and scaled rows are reported too
    replaced = report[report["action"] == "replaced"]
    expected = {
        (labels[i], part)
        for part in comp.parts
        for i in np.flatnonzero(comp.replaced[part].to_numpy())
    }
    assert set(zip(replaced["row"], replaced["column"], strict=True)) == expected
    scaled = report[report["action"] == "scaled"].set_index("row")["value"]
    observed = (comp.status == OBSERVED).to_numpy()
    changed = observed & ~np.isclose(comp.values.to_numpy(), comp.raw.to_numpy(), rtol=1e-13)
    assert set(np.asarray(labels, dtype=object)[changed.any(axis=1)]) <= set(scaled.index)
    for label, factor in scaled.items():
        i = labels.index(label)
        np.testing.assert_allclose(
            comp.values.to_numpy()[i, observed[i]], comp.raw.to_numpy()[i, observed[i]] * factor
        )
    # flags: one report entry per flagged row, same codes
    flagged = report[report["action"] == "flagged"].set_index("row")["code"]
    assert flagged.to_dict() == comp.flags["code"].to_dict()


# ----------------------------------------------------------------------------- cases


@dataclass
class Case:
    name: str
    make: object  # () -> DataFrame, or (tmp_path) -> Path for a file
    options: dict = field(default_factory=dict)
    parts: list | None = None
    metadata: list | None = None
    index: str | None = "positions"  # the index column's name, None, or "positions"
    codes: dict = field(default_factory=dict)  # column -> code in the column account
    report: set = field(default_factory=set)  # (row, column, code) entries that must be there
    flags: dict = field(default_factory=dict)  # row -> codes (exactly these rows flagged)
    values: dict = field(default_factory=dict)  # (row, part) -> value in the common unit
    error: str | None = None  # regex of the CompositionError
    file: bool = False


def frame(data: dict, index=None) -> callable:
    return lambda: pd.DataFrame(data, index=index)


def ids(n: int, prefix: str = "RK-") -> list[str]:
    return [f"{prefix}{i:04d}" for i in range(1, n + 1)]


MAJ = {"SiO2 (wt%)": [60.0, 61.0, 59.0], "Al2O3 (wt%)": [39.5, 38.5, 40.0]}


def _csv(text: str, name: str = "table.csv", encoding: str = "utf-8"):
    def make(tmp_path: Path) -> Path:
        path = tmp_path / name
        path.write_bytes(text.encode(encoding))
        return path

    return make


def _xlsx(rows: list, stored: dict | None = None):
    """An .xlsx file of ``rows``; ``stored`` gives formula cells ('D2') a stored result."""

    def make(tmp_path: Path) -> Path:
        path = tmp_path / "table.xlsx"
        book = openpyxl.Workbook()
        sheet = book.active
        for row in rows:
            sheet.append(row)
        book.save(path)
        if stored:
            _store_results(path, stored)
        return path

    return make


def _store_results(path: Path, stored: dict) -> None:
    """Write stored formula results into the sheet XML, as a spreadsheet program does."""
    with zipfile.ZipFile(path) as z:
        items = {name: z.read(name) for name in z.namelist()}
    xml = items["xl/worksheets/sheet1.xml"].decode()
    for ref, value in stored.items():
        xml, n = re.subn(
            rf'(<c r="{ref}"[^>]*>)<f>([^<]*)</f><v\s*/>', rf"\1<f>\2</f><v>{value}</v>", xml
        )
        assert n == 1, ref
    items["xl/worksheets/sheet1.xml"] = xml.encode()
    with zipfile.ZipFile(path, "w") as z:
        for name, data in items.items():
            z.writestr(name, data)


CASES = [
    # ------------------------------------------------------------ files
    Case(
        "csv duplicate header",
        _csv("Sample,La (ppm),Ce (ppm),Nd (ppm),Sm (ppm),Eu (ppm),La (ppm)\nA,30,60,25,5,1,31\n"),
        error=r"table\.csv'.*duplicate headers \['La \(ppm\)'\].*columns 2 and 7",
        file=True,
    ),
    Case(
        "csv duplicate header after trimming spaces",
        _csv("Sample,Ce (ppm), Ce (ppm) ,Nd (ppm)\nA,60,61,25\n"),
        error=r"duplicate headers \['Ce \(ppm\)'\].*columns 2 and 3",
        file=True,
    ),
    Case(
        "xlsx duplicate header",
        _xlsx([["Sample ID", "Cu (ppm)", "Zn (ppm)", "Cu (ppm)"], ["A", 1, 2, 3]]),
        error=r"table\.xlsx'.*duplicate headers \['Cu \(ppm\)'\].*columns 2 and 4",
        file=True,
    ),
    Case(
        "xlsx date cell in a part column",
        _xlsx(
            [
                ["Sample ID", "SiO2 (wt%)", "Al2O3 (wt%)"],
                ["B-1", 60, 40],
                ["B-2", datetime.datetime(2021, 3, 4), 40],
            ]
        ),
        error=r"row 'B-2', column 'SiO2 \(wt%\)'.*'2021-03-04 00:00:00'.*date",
        file=True,
    ),
    Case(
        "xlsx formula without a stored result in a part column",
        _xlsx([["Sample ID", "SiO2 (wt%)", "Al2O3 (wt%)"], ["C-1", 60, "=100-B2"]]),
        error=r"row 'C-1', column 'Al2O3 \(wt%\)'.*'=100-B2'.*formula without a stored result",
        file=True,
    ),
    Case(
        "xlsx formula with a stored result",
        _xlsx(
            [["Sample ID", "SiO2 (wt%)", "Al2O3 (wt%)"], ["C-1", 60, "=100-B2"], ["C-2", 58, 42]],
            stored={"C2": 40},
        ),
        parts=["SiO2", "Al2O3"],
        metadata=[],
        index="Sample ID",
        report={("C-1", "Al2O3", "formula_value")},
        values={("C-1", "Al2O3"): 40.0},
        file=True,
    ),
    Case(
        "xlsx numeric header of a text column",
        _xlsx([["Sample ID", 2019, "SiO2 (wt%)", "Al2O3 (wt%)"], ["D-1", "wet", 60, 40]]),
        parts=["SiO2", "Al2O3"],
        metadata=["2019"],
        index="Sample ID",
        codes={"2019": "text_column"},
        report={(None, "2019", "name_converted")},
        file=True,
    ),
    Case(
        "csv semicolons, decimal comma and dot thousands",
        _csv("Probe;SiO2 (wt%);Al2O3 (wt%);Zr (ppm)\nE-1;60,5;39,5;1.234,5\nE-2;61,0;39,0;980\n"),
        options={"decimal": ",", "thousands": "."},
        parts=["SiO2", "Al2O3", "Zr"],
        index="Probe",  # the first column, unique text: the row labels
        metadata=[],
        report={("E-1", "Zr", "thousands_separator"), ("E-1", "SiO2", "decimal_comma")},
        values={("E-1", "Zr"): 0.12345, ("E-2", "SiO2"): 61.0},
        file=True,
    ),
    Case(
        "csv sample id in the third column",
        _csv(
            "lithology,site,sample_id,SiO2 (wt%),Al2O3 (wt%)\n"
            "shale,N,F-9,60,40\nshale,N,F-1,59,41\n"
        ),
        parts=["SiO2", "Al2O3"],
        metadata=["lithology", "site"],
        index="sample_id",
        codes={"sample_id": "index_detected", "lithology": "text_column"},
        file=True,
    ),
    Case(
        "csv stated total that disagrees",
        _csv(
            "Sample,SiO2 (wt%),Al2O3 (wt%),CaO (wt%),Total\n"
            "G-1,60.00,30.00,10.00,100.00\nG-2,60.00,30.00,10.00,96.10\nG-3,59.80,30.00,10.00,99.90\n"
        ),
        parts=["SiO2", "Al2O3", "CaO"],
        metadata=["Total"],
        index="Sample",
        codes={"Total": "total_column"},
        flags={"G-2": "total_mismatch"},
        file=True,
    ),
    Case(
        "tsv in latin-1 with a ug/g header",
        _csv("id\tCu (µg/g)\tZn (µg/g)\nH-1\t12\t80\nH-2\t15\t90\n", "t.tsv", "latin-1"),
        parts=["Cu", "Zn"],
        index="id",
        values={("H-2", "Cu"): 15.0},
        file=True,
    ),
    Case(
        "csv with a blank first header and unique codes",
        _csv(",SiO2 (wt%),Al2O3 (wt%)\nK-01,60,40\nK-02,61,39\n"),
        parts=["SiO2", "Al2O3"],
        metadata=[],
        index="Unnamed: 0",
        codes={"Unnamed: 0": "index_detected"},
        file=True,
    ),
    # ------------------------------------------------------------ units in cells
    Case(
        "units in cells agree with the header",
        frame(
            {"Cu (ppm)": ["150 ppm", "<5 ppm", "120"], "Zn (ppm)": [80, 90, 100]}, ["a", "b", "c"]
        ),
        options={"check_total": False},
        parts=["Cu", "Zn"],
        report={("a", "Cu", "unit_in_cell"), ("b", "Cu", "below_less_than")},
        values={("a", "Cu"): 150.0},
    ),
    Case(
        "units in cells disagree with the header",
        frame({"Cu (ppm)": ["150 ppm", "0.02 %"], "Zn (ppm)": [80, 90]}, ["a", "b"]),
        error=r"column 'Cu \(ppm\)'.*'0\.02 %' at row 'b' carries the unit 'wt%'.*'ppm'",
    ),
    Case(
        "units in cells disagree with each other",
        frame({"Zn": ["12 ppm", "0.5 %", "13 ppm"], "Cu": ["1 ppm", "2 ppm", "3 ppm"]}),
        error=r"column 'Zn'.*'0\.5 %' at row 1 carries the unit 'wt%'.*'12 ppm' at row 0",
    ),
    Case(
        "units in cells without a unit in the header",
        frame({"Cu": ["15 mg/kg", "20 mg/kg"], "Pb": ["3 mg/kg", "<1 mg/kg"]}, ["x", "y"]),
        options={"check_total": False},
        parts=["Cu", "Pb"],
        codes={"Cu": "part_unit_in_cells"},
        report={("y", "Pb", "below_less_than")},
    ),
    # ------------------------------------------------------------ part-looking columns
    Case(
        "all-blank oxide column",
        frame({**MAJ, "MgO (wt%)": ["", " ", None]}, ids(3)),
        error=r"column 'MgO \(wt%\)' names a part but holds no value.*row 'RK-0001'",
    ),
    Case(
        "column of unknown missing tokens",
        frame({**MAJ, "Cd (ppm)": ["n/a", "n/a", "0.3"]}, ids(3)),
        error=r"row 'RK-0001', column 'Cd \(ppm\)': value 'n/a'.*missing_tokens",
    ),
    Case(
        "boolean cells in an element column",
        frame({**MAJ, "Au (ppb)": [True, False, True]}, ids(3)),
        error=r"row 'RK-0001', column 'Au \(ppb\)'",
    ),
    Case(
        "unknown unit on an element",
        frame({**MAJ, "Ba (ppmw)": [100, 120, 90]}, ids(3)),
        error=r"column 'Ba \(ppmw\)': unknown unit 'ppmw'",
    ),
    # ------------------------------------------------------------ totals and sums
    Case(
        "sum of the REE kept out",
        frame(
            {
                "La (ppm)": [30, 32, 28],
                "Ce (ppm)": [60, 65, 55],
                "Nd (ppm)": [25, 27, 24],
                "Sum REE (ppm)": [115, 124, 107],
                "ΣHREE": [9, 10, 8],
            },
            ids(3),
        ),
        parts=["La", "Ce", "Nd"],
        metadata=["Sum REE (ppm)", "ΣHREE"],
        codes={"Sum REE (ppm)": "sum_column", "ΣHREE": "sum_column"},
    ),
    Case(
        "total of the oxides compared with the parts in percent",
        frame(
            {
                **MAJ,
                "Ba (ppm)": [5000.0, 4000.0, 6000.0],
                "Sr (ppm)": [3000.0, 2000.0, 1000.0],
                "Total oxides": [99.5, 99.5, 99.0],
            },
            ids(3),
        ),
        parts=["SiO2", "Al2O3", "Ba", "Sr"],
        metadata=["Total oxides"],
        codes={"Total oxides": "total_column"},
        flags={},  # analytical totals 100.3, 100.1, 99.6 (traces 0.8 wt%): inside the window
    ),
    Case(
        "lower-case sum of point counts",
        frame(
            {
                "Qz": [120, 98, 110],
                "Fsp": [60, 75, 70],
                "Lith": [20, 27, 20],
                "sum": [200, 200, 150],
            },
            ["t1", "t2", "t3"],
        ),
        options={"default_unit": "count"},
        parts=["Qz", "Fsp", "Lith"],
        metadata=["sum"],
        flags={"t3": "total_mismatch"},
    ),
    Case(
        "LOI is a part, Total is not",
        frame(
            {
                "SiO2": [50.0, 51.0],
                "CaO": [30.0, 29.0],
                "LOI": [20.0, 20.0],
                "Total": [100.0, 100.0],
            },
            ["L-1", "L-2"],
        ),
        parts=["SiO2", "CaO", "LOI"],
        metadata=["Total"],
        codes={"LOI": "part_analyte_header", "Total": "total_column"},
    ),
    Case(
        "total sulfur and total iron are analytes",
        frame(
            {
                "SiO2": [60.0, 61.0],
                "Fe2O3T": [7.0, 6.5],
                "Total S (wt%)": [0.5, 0.4],
                "Al2O3": [32.5, 32.1],
            },
            ["S-1", "S-2"],
        ),
        parts=["SiO2", "Fe2O3T", "Total S", "Al2O3"],
        metadata=[],
        codes={"Fe2O3T": "part_analyte_header", "Total S (wt%)": "part_unit_header"},
    ),
    Case(
        "stated total with a missing cell",
        frame({**MAJ, "Total (wt%)": [99.5, "n.a.", 99.0]}, ids(3)),
        parts=["SiO2", "Al2O3"],
        report={("RK-0002", "Total (wt%)", "total_cell_missing")},
        flags={},
    ),
    # ------------------------------------------------------------ coordinates and yttrium
    Case(
        "Y beside X is a coordinate",
        frame({"X": [1.0, 2.0], "Y": [5.0, 6.0], "Cu (ppm)": [10, 11], "Zn (ppm)": [50, 60]}),
        parts=["Cu", "Zn"],
        metadata=["X", "Y"],
        codes={"Y": "coordinate_column"},
    ),
    Case(
        "Y alone is yttrium",
        frame({"Y": [25.0, 30.0], "Zr": [200.0, 180.0], "Nb": [12.0, 15.0]}, ["a", "b"]),
        options={"default_unit": "ppm"},
        parts=["Y", "Zr", "Nb"],
        codes={"Y": "part_analyte_header"},
    ),
    Case(
        "Y with a ppm unit is yttrium even beside easting",
        frame({"Easting": [1.0, 2.0], "Y (ppm)": [25, 30], "Zr (ppm)": [200, 180]}, ["a", "b"]),
        parts=["Y", "Zr"],
        metadata=["Easting"],
    ),
    Case(
        "depth, weight, pH and year are metadata",
        frame(
            {
                "Depth (m)": [1.0, 2.0],
                "Weight (g)": [30.1, 29.8],
                "pH": [6.5, 7.1],
                "Year": [2019, 2020],
                "Cu (ppm)": [10, 12],
                "Zn (ppm)": [50, 55],
            },
            ["a", "b"],
        ),
        parts=["Cu", "Zn"],
        metadata=["Depth (m)", "Weight (g)", "pH", "Year"],
        codes={
            "Depth (m)": "non_part_unit",
            "Weight (g)": "metadata_name",
            "pH": "metadata_name",
            "Year": "metadata_name",
        },
    ),
    Case(
        "a comment column of mostly text",
        frame({**MAJ, "Comment": ["dup", "12", "re-run"]}, ids(3)),
        parts=["SiO2", "Al2O3"],
        metadata=["Comment"],
        codes={"Comment": "mixed_column"},
    ),
    # ------------------------------------------------------------ row labels
    Case(
        "sample id detected, messages name it",
        frame({"Sample ID": ids(3), **MAJ, "CaO (wt%)": [0.5, -0.5, 1.0]}),
        error=r"negative value '-0\.5' at row 'RK-0002', column 'CaO \(wt%\)'",
    ),
    Case(
        "sample id with a repeated value",
        frame({"Sample ID": ["A", "A", "B"], **MAJ}),
        parts=["SiO2", "Al2O3"],
        metadata=["Sample ID"],
        index="positions",
        codes={"Sample ID": "id_not_unique"},
    ),
    Case(
        "index_col=False keeps the id among the metadata",
        frame({"sample_id": ids(3), **MAJ}),
        options={"index_col": False},
        parts=["SiO2", "Al2O3"],
        metadata=["sample_id"],
        index="positions",
    ),
    Case(
        "index_col names a DataFrame column",
        frame({"site": ["n", "s", "n"], "Lab No": [11, 12, 13], **MAJ}),
        options={"index_col": "Lab No"},
        parts=["SiO2", "Al2O3"],
        metadata=["site"],
        index="Lab No",
        codes={"Lab No": "index_named"},
    ),
    Case(
        "index_col column with an empty label",
        frame({"code": ["A", "", "C"], **MAJ}),
        options={"index_col": "code"},
        error=r"index_col column 'code' cannot label the rows: 1 row\(s\) without a value",
    ),
    Case(
        "index_col=True",
        frame({"code": ["A", "B", "C"], **MAJ}),
        options={"index_col": True},
        error=r"index_col=True is not an option",
    ),
    # ------------------------------------------------------------ column names
    Case(
        "integer column names",
        frame({0: [60.0, 61.0], 1: [40.0, 39.0]}, ["a", "b"]),
        parts=["0", "1"],
        report={(None, "0", "name_converted"), (None, "1", "name_converted")},
    ),
    Case(
        "two-row header as tuples",
        lambda: pd.DataFrame(
            [[60.0, 39.9, 210], [61.0, 38.9, 180]],
            columns=pd.MultiIndex.from_tuples([("SiO2", "wt%"), ("Al2O3", "wt%"), ("Zr", "ppm")]),
            index=["a", "b"],
        ),
        parts=["SiO2", "Al2O3", "Zr"],
        codes={"SiO2 wt%": "part_unit_header", "Zr ppm": "part_unit_header"},
    ),
    Case(
        "names that collide once converted",
        frame({1: [60.0, 61.0], "1": [40.0, 39.0], "CaO": [1.0, 1.0]}),
        error=r"duplicate column names \['1'\].*columns 1 and 2",
    ),
    # ------------------------------------------------------------ cell types
    Case(
        "complex cell",
        frame({**MAJ, "CaO (wt%)": [0.5, complex(0.5, 0.1), 0.4]}, ids(3)),
        error=r"complex number \(0\.5\+0\.1j\) at row 'RK-0002', column 'CaO \(wt%\)'",
    ),
    Case(
        "complex column",
        frame({**MAJ, "CaO (wt%)": np.array([0.5, 0.5, 0.4], dtype=complex)}, ids(3)),
        error=r"complex number .* at row 'RK-0001', column 'CaO \(wt%\)'",
    ),
    Case(
        "list cell",
        frame({**MAJ, "Cu (ppm)": [12, [12, 13], 14]}, ids(3)),
        error=r"a list cell at row 'RK-0002', column 'Cu \(ppm\)'",
    ),
    Case(
        "dict cell",
        frame({**MAJ, "Cu (ppm)": [12, 13, {"value": 14}]}, ids(3)),
        error=r"a dict cell at row 'RK-0003', column 'Cu \(ppm\)'",
    ),
    Case(
        "int too large for a float",
        frame({**MAJ, "Cu (ppm)": [12, 10**400, 14]}, ids(3)),
        error=r"integer with 401 digits at row 'RK-0002', column 'Cu \(ppm\)'",
    ),
    # ------------------------------------------------------------ separators
    Case(
        "thousands separator without the option",
        frame({**MAJ, "Ba (ppm)": ["1,234", "980", "1,050"]}, ids(3)),
        error=r"row 'RK-0001', column 'Ba \(ppm\)': value '1,234'.*thousands=','.*decimal=','",
    ),
    Case(
        "thousands separator read",
        frame({**MAJ, "Ba (ppm)": ["1,234.5", "980", "1,050"]}, ids(3)),
        options={"thousands": ","},
        parts=["SiO2", "Al2O3", "Ba"],
        report={("RK-0001", "Ba", "thousands_separator")},
        values={("RK-0001", "Ba"): 0.12345, ("RK-0003", "Ba"): 0.105},
    ),
    Case(
        "thousands separator in the wrong place",
        frame({**MAJ, "Ba (ppm)": ["12,34", "980", "1,050"]}, ids(3)),
        options={"thousands": ","},
        error=r"row 'RK-0001', column 'Ba \(ppm\)': value '12,34'.*groups of three digits",
    ),
    Case(
        "ambiguous dot with a decimal comma",
        frame({"SiO2 (wt%)": ["60,5", "61"], "Ba (ppm)": ["1.234", "980"]}, ["a", "b"]),
        options={"decimal": ","},
        error=r"row 'a', column 'Ba \(ppm\)': value '1\.234'.*thousands='\.'",
    ),
    Case(
        "minus sign read as below detection",
        frame({**MAJ, "Cd (ppm)": ["0.3", "\u22120.1", "0.2"]}, ids(3)),
        options={"negative_is_below_detection": True},
        parts=["SiO2", "Al2O3", "Cd"],
        report={("RK-0002", "Cd", "below_negative")},
    ),
    # ------------------------------------------------------------ detection limits
    Case(
        "bare token beside '<x' entries",
        frame({**MAJ, "Zr (ppm)": ["<10", "bdl", "<10"], "Cu (ppm)": ["<5", "12", "8"]}, ids(3)),
        error=r"entry 'bdl' at row 'RK-0002', column 'Zr \(ppm\)'.*give 10 ppm \(2 cells\).*"
        r"detection_limits=\{'Zr': 10\}",
    ),
    Case(
        "limits carried in attrs",
        lambda: _with_attrs(
            pd.DataFrame({**MAJ, "Zr (ppm)": ["n.d.", "150", "bdl"]}, index=ids(3)),
            {"Zr": 5.0, "Hf": 1.0},
        ),
        parts=["SiO2", "Al2O3", "Zr"],
        report={(None, None, "limits_from_attrs"), ("RK-0001", "Zr", "below_token")},
    ),
    # ------------------------------------------------------------ rows
    Case(
        "row without any value",
        frame({"Cu (ppm)": ["12", "-", "10"], "Zn (ppm)": ["80", "", "85"]}, ["a", "b", "c"]),
        parts=["Cu", "Zn"],
        flags={"b": "no_part_observed;missing_parts"},
    ),
    Case(
        "categorical numbers",
        frame({"SiO2": pd.Categorical([60.0, 61.0, 60.0]), "Al2O3": [40.0, 39.0, 40.0]}, ids(3)),
        parts=["SiO2", "Al2O3"],
        values={("RK-0002", "SiO2"): 61.0},
    ),
]


def _with_attrs(df: pd.DataFrame, limits: dict) -> pd.DataFrame:
    df.attrs["detection_limits"] = limits
    return df


def _table_of(case: Case, tmp_path: Path):
    if case.file:
        path = case.make(tmp_path)
        return path, path.read_bytes()
    df = case.make()
    return df, copy.deepcopy(df)


def _file_frame(path: Path) -> pd.DataFrame:
    """The cells of a file as pandas reads them (for the conservation check)."""
    if path.suffix == ".xlsx":
        return pd.read_excel(path, dtype=str, keep_default_na=False)
    sep = "\t" if path.suffix == ".tsv" else (";" if ";" in path.read_text("latin-1") else ",")
    return pd.read_csv(path, sep=sep, dtype=str, keep_default_na=False, encoding="latin-1")


@pytest.mark.parametrize("case", [pytest.param(c, id=c.name) for c in CASES])
def test_catalogue(case: Case, tmp_path):
    source, before = _table_of(case, tmp_path)
    if case.error is not None:
        with pytest.raises(CompositionError, match=case.error):
            read_composition(source, **case.options)
    else:
        comp = read_composition(source, **case.options)
        if case.parts is not None:
            assert comp.parts == case.parts
        if case.metadata is not None:
            assert list(comp.metadata.columns) == case.metadata
        if case.index == "positions":
            assert comp.values.index.name is None
            assert comp.settings["index_source"] in ("positions", "frame")
        elif case.index is not None:
            assert comp.values.index.name == case.index
        for column, code in case.codes.items():
            assert comp.column_account.loc[column, "code"] == code, column
        report = set(
            zip(comp.report["row"], comp.report["column"], comp.report["code"], strict=True)
        )
        for row, column, code in case.report:
            matches = {
                (r, c, k)
                for r, c, k in report
                if k == code and (row is None or r == row) and (column is None or c == column)
            }
            assert matches, (row, column, code)
        if case.flags or case.parts is not None:
            assert comp.flags["code"].to_dict() == case.flags
        for (row, part), value in case.values.items():
            assert comp.raw.loc[row, part] == pytest.approx(value, rel=1e-12)
        table = _file_frame(source) if case.file else source
        assert_accounted(table, comp)
    if case.file:
        assert source.read_bytes() == before  # the file is not touched
    else:
        pd.testing.assert_frame_equal(source, before)
        assert source.attrs == before.attrs


def test_catalogue_is_large_enough():
    assert len(CASES) >= 40
    assert sum(c.file for c in CASES) >= 8


# ----------------------------------------------------------------------------- both numbers


def test_stated_total_mismatch_reports_both_numbers():
    df = pd.DataFrame(
        {
            "SiO2 (wt%)": [60.0, 60.0],
            "Al2O3 (wt%)": [30.0, 30.0],
            "CaO (wt%)": [10.0, 10.0],
            "Total": [100.0, 96.10],
        },
        index=["G-1", "G-2"],
    )
    comp = read_composition(df)
    assert list(comp.flags.index) == ["G-2"]
    reason = comp.flags.loc["G-2", "reason"]
    assert "96.1 wt%" in reason and "sum of the parts 100 wt%" in reason
    assert "tolerance 0.5 wt%" in reason
    assert comp.flags.loc["G-2", "stated_total"] == pytest.approx(96.10)
    assert comp.flags.loc["G-2", "total"] == pytest.approx(100.0)
    # the tolerance is settable: 4 wt% lets the row pass; None switches the comparison off
    assert len(read_composition(df, total_tolerance=4.0).flags) == 0
    off = read_composition(df, total_tolerance=None)
    assert len(off.flags) == 0 and "not compared" in off.column_account.loc["Total", "detail"]


def test_stated_total_in_ppm_of_a_trace_table():
    df = pd.DataFrame(
        {"Cu (ppm)": [10.0, 10.0], "Zn (ppm)": [90.0, 90.0], "Sum (ppm)": [100.0, 6000.0]},
        index=["a", "b"],
    )
    comp = read_composition(df)
    # 0.5 wt% = 5,000 ppm (common practice): row b differs by 5,900 ppm
    assert comp.flags["code"].to_dict() == {"b": "total_mismatch"}
    assert "tolerance 5000 ppm" in comp.flags.loc["b", "reason"]


def test_stated_total_of_the_majors_is_not_compared_with_the_traces():
    # the laboratory's total covers its major-element package; the traces (here 1.2 wt% in
    # all, more than the tolerance) are not in it, and the comparison picks the majors
    n = 6
    df = pd.DataFrame(
        {
            "SiO2 (wt%)": np.full(n, 60.0),
            "Al2O3 (wt%)": np.full(n, 38.8),
            "Ba (ppm)": np.full(n, 8000.0),
            "Sr (ppm)": np.full(n, 4000.0),
            "Total": [98.8, 98.8, 98.8, 98.8, 98.8, 95.0],
        },
        index=ids(n),
    )
    comp = read_composition(df)
    assert comp.flagged_rows("total_mismatch").tolist() == ["RK-0006"]
    detail = comp.column_account.loc["Total", "detail"]
    assert "the 2 parts reported in percent" in detail
