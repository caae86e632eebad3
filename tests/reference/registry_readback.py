"""Reads a kimech registry CSV back with the standard readers a loader would use
(Python's csv module and pandas) and checks the contract a loader relies on:

- the header is the documented, versioned column list;
- every cell of a numeric column is empty or a finite number (never text such
  as '-1.08 with an apostrophe, never NaN/inf);
- no cell and no header could start a spreadsheet formula (= + - @, tab, CR)
  unless it is a plain number;
- qualifier columns hold only '', '~', '<', '<=', '>', '>=' ('' = exact).

Usage: python3 tests/reference/registry_readback.py REGISTRY.csv
Prints one line 'ok: <rows> rows, <numbers> numbers' and exits 0, or names the
first offending cell and exits 1. Used by tests/registry.rs.
"""

import csv
import math
import sys

COLUMNS = [
    "compound", "target", "endpoint", "qualifier", "value", "unit", "pki", "pki_qualifier",
    "low", "high", "interval_method", "n", "n_censored", "values", "assays", "pki_sd", "rank",
    "mechanism", "method", "flags", "conditions", "ligand_efficiency",
    "ligand_efficiency_qualifier", "versus", "delta_pki", "delta_pki_qualifier", "error",
    "source", "tool", "registry_version",
]
NUMERIC = ["value", "pki", "low", "high", "n", "n_censored", "pki_sd", "rank",
           "ligand_efficiency", "delta_pki", "registry_version"]
QUALIFIERS = ["qualifier", "pki_qualifier", "ligand_efficiency_qualifier", "delta_pki_qualifier"]
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def is_number(text):
    try:
        return math.isfinite(float(text))
    except ValueError:
        return False


def fail(message):
    print(f"FAIL: {message}")
    sys.exit(1)


def main(path):
    with open(path, newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))
    header, body = rows[0], rows[1:]
    if header != COLUMNS:
        fail(f"header {header}")
    numbers = 0
    for i, row in enumerate(body, start=2):
        cells = dict(zip(header, row))
        for name in NUMERIC:
            cell = cells[name]
            if cell != "":
                if not is_number(cell):
                    fail(f"line {i}, {name}: {cell!r} is not a number")
                numbers += 1
        for name in QUALIFIERS:
            if cells[name] not in ("", "~", "<", "<=", ">", ">="):
                fail(f"line {i}, {name}: {cells[name]!r} is not a qualifier")
        for name, cell in cells.items():
            if cell.startswith(FORMULA_START) and not is_number(cell):
                fail(f"line {i}, {name}: {cell!r} would start a formula")
        if cells["registry_version"] != "2":
            fail(f"line {i}: registry_version {cells['registry_version']!r}")
    # pandas must infer the numeric columns as numbers (float or int), not text.
    try:
        import pandas
    except ImportError:
        pandas = None
    if pandas is not None and body:
        frame = pandas.read_csv(path, keep_default_na=True)
        for name in NUMERIC:
            if frame[name].notna().any() and not pandas.api.types.is_numeric_dtype(frame[name]):
                fail(f"pandas reads {name} as {frame[name].dtype}")
    print(f"ok: {len(body)} rows, {numbers} numbers")


if __name__ == "__main__":
    main(sys.argv[1])
