"""Reason codes of the intake report, the flags and the column account.

Every entry of :attr:`Composition.report`, every reason of
:attr:`Composition.flags` and every row of :attr:`Composition.column_account`
carries one of these codes next to its human text. Programs (the triage panel,
scripts) read the codes; the text is for people. A code keeps its meaning; new
codes may be added.
"""

from __future__ import annotations

# --- what became of each input column (report action "column", one entry per column)
PART_NAMED = "part_named"
PART_UNIT_HEADER = "part_unit_header"
PART_ANALYTE_HEADER = "part_analyte_header"
PART_UNIT_IN_CELLS = "part_unit_in_cells"
PART_NUMERIC = "part_numeric"
INDEX_NAMED = "index_named"
INDEX_DETECTED = "index_detected"
TOTAL_COLUMN = "total_column"
SUM_COLUMN = "sum_column"
COORDINATE_COLUMN = "coordinate_column"
NON_PART_UNIT = "non_part_unit"
METADATA_NAME = "metadata_name"
ID_NOT_UNIQUE = "id_not_unique"
TEXT_COLUMN = "text_column"
MIXED_COLUMN = "mixed_column"
EMPTY_COLUMN = "empty_column"
NOT_IN_PARTS = "not_in_parts"

# --- table-level notes
NAME_CONVERTED = "name_converted"  # action "renamed"
LIMITS_FROM_ATTRS = "limits_from_attrs"  # action "setting"

# --- one cell of a part column
DECIMAL_COMMA = "decimal_comma"  # action "parsed_text"
MINUS_SIGN = "minus_sign"
THOUSANDS_SEPARATOR = "thousands_separator"
UNIT_IN_CELL = "unit_in_cell"
FORMULA_VALUE = "formula_value"
MISSING_BLANK = "missing_blank"  # action "missing"
MISSING_TOKEN = "missing_token"
BELOW_TOKEN = "below_token"  # action "below_detection"
BELOW_LESS_THAN = "below_less_than"
BELOW_ZERO = "below_zero"
BELOW_NEGATIVE = "below_negative"  # action "negative_as_below_detection"
REPLACED_MULTIPLICATIVE = "replaced_multiplicative"  # action "replaced"
REPLACED_SIMPLE = "replaced_simple"

# --- one part column as a whole
UNIT_CONVERTED = "unit_converted"  # action "unit_converted"
FORMULA_CONVERTED = "formula_converted"  # action "formula_converted"

# --- one row
OBSERVED_SCALED = "observed_scaled"  # action "scaled"
TOTAL_CELL_MISSING = "total_cell_missing"  # action "total_not_compared"
TOTAL_CELL_UNREADABLE = "total_cell_unreadable"
NO_PART_OBSERVED = "no_part_observed"  # action "flagged" (and in Composition.flags)
MISSING_PARTS = "missing_parts"
TOTAL_OUTSIDE_WINDOW = "total_outside_window"
TOTAL_MISMATCH = "total_mismatch"
NOT_REPLACED_NO_OBSERVED = "not_replaced_no_observed"
NOT_REPLACED_OVERLOAD = "not_replaced_overload"

#: Code -> short meaning (also the text of a triage button for a flag code).
REASONS: dict[str, str] = {
    PART_NAMED: "part: named in parts=",
    PART_UNIT_HEADER: "part: the header names a composition unit",
    PART_ANALYTE_HEADER: "part: the header names an element, oxide or analyte",
    PART_UNIT_IN_CELLS: "part: the cells carry a composition unit",
    PART_NUMERIC: "part: numbers only (the header names no unit or analyte)",
    INDEX_NAMED: "row labels: the column named by index_col=",
    INDEX_DETECTED: "row labels: a sample-id column (unique text in every row)",
    TOTAL_COLUMN: "metadata: a stated total, compared per row with the sum of the parts",
    SUM_COLUMN: "metadata: the sum of a group of parts (kept out of the parts)",
    COORDINATE_COLUMN: "metadata: a coordinate",
    NON_PART_UNIT: "metadata: the header's unit is not a composition unit",
    METADATA_NAME: "metadata: the header names a sample property, not a part",
    ID_NOT_UNIQUE: "metadata: looks like a sample id but is not unique or not complete",
    TEXT_COLUMN: "metadata: text, categories, dates or booleans",
    MIXED_COLUMN: "metadata: numbers mixed with text, the header names no part",
    EMPTY_COLUMN: "metadata: every cell empty, the header names no part",
    NOT_IN_PARTS: "metadata: not named in parts=",
    NAME_CONVERTED: "a column name that was not text, converted to text",
    LIMITS_FROM_ATTRS: "detection limits taken from DataFrame.attrs['detection_limits']",
    DECIMAL_COMMA: "number with a decimal comma",
    MINUS_SIGN: "number with a typographic minus sign",
    THOUSANDS_SEPARATOR: "number with thousands separators",
    UNIT_IN_CELL: "number with its unit in the cell",
    FORMULA_VALUE: "spreadsheet formula: its stored result read",
    MISSING_BLANK: "empty cell",
    MISSING_TOKEN: "missing-value token",
    BELOW_TOKEN: "below-detection token",
    BELOW_LESS_THAN: "'<limit' entry",
    BELOW_ZERO: "zero read as below detection",
    BELOW_NEGATIVE: "negative value read as below detection",
    REPLACED_MULTIPLICATIVE: "replaced (multiplicative replacement)",
    REPLACED_SIMPLE: "replaced (fraction of the limit)",
    UNIT_CONVERTED: "unit converted",
    FORMULA_CONVERTED: "formula converted",
    OBSERVED_SCALED: "observed parts of the row scaled (multiplicative replacement)",
    TOTAL_CELL_MISSING: "stated total empty: row not compared",
    TOTAL_CELL_UNREADABLE: "stated total not a number: row not compared",
    NO_PART_OBSERVED: "no part observed",
    MISSING_PARTS: "missing part(s)",
    TOTAL_OUTSIDE_WINDOW: "analytical total outside the window",
    TOTAL_MISMATCH: "stated total differs from the sum of the parts",
    NOT_REPLACED_NO_OBSERVED: "below-detection values not replaced (no observed part)",
    NOT_REPLACED_OVERLOAD: (
        "below-detection values not replaced (the replacements would reach the observed total)"
    ),
}

#: Codes a flagged row can carry, in the order their reasons are listed.
FLAG_CODES: tuple[str, ...] = (
    NO_PART_OBSERVED,
    MISSING_PARTS,
    TOTAL_OUTSIDE_WINDOW,
    TOTAL_MISMATCH,
    NOT_REPLACED_NO_OBSERVED,
    NOT_REPLACED_OVERLOAD,
)

#: Separator of the codes of a flagged row with several reasons (``flags["code"]``).
CODE_SEPARATOR = ";"
