#!/usr/bin/env python3
"""Compares two kimech outputs (CSV, JSON or text) number by number.

Used when a change to the fit's stopping rules moves the last digits of the
estimates (issue 13): every non-numeric cell must be identical (calls,
qualifiers, flags, notes, reasons), and every number must agree to a
relative 1e-8 — except intervals (`*_low`, `*_high`, `low`, `high`) and
p-values (`*_p`, `p`), which are allowed 1e-6 (a profile interval is found
by a root search whose own tolerance is coarser than the point estimate's).

Usage: python3 benches/compare_outputs.py OLD NEW [OLD NEW ...]
Exits 1 and lists the offending cells if any pair differs beyond that.
"""
import csv
import json
import re
import sys

NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")
TOKEN = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")


def loose(name):
    name = str(name).lower()
    return bool(re.search(r"(_low|_high|^low$|^high$|_p$|^p$|flat_p|p_value|interval)", name))


def close(a, b, tol):
    if a == b:
        return True
    return abs(a - b) <= tol * max(abs(a), abs(b))


class Report:
    def __init__(self):
        self.changed = 0
        self.bad = []
        self.worst = {1e-8: 0.0, 1e-6: 0.0}

    def number(self, where, name, a, b):
        tol = 1e-6 if loose(name) else 1e-8
        if a != b:
            self.changed += 1
            rel = abs(a - b) / max(abs(a), abs(b))
            self.worst[tol] = max(self.worst[tol], rel)
            if not close(a, b, tol):
                self.bad.append(f"{where} {name}: {a!r} vs {b!r} (relative {rel:.2e} > {tol})")

    def text(self, where, name, a, b):
        if a != b:
            self.bad.append(f"{where} {name}: {a!r} vs {b!r} (text differs)")


def cells(report, where, name, a, b):
    if NUMBER.match(a.strip()) and NUMBER.match(b.strip()):
        report.number(where, name, float(a), float(b))
        return
    ta, tb = TOKEN.split(a), TOKEN.split(b)
    na, nb = TOKEN.findall(a), TOKEN.findall(b)
    if ta != tb or len(na) != len(nb):
        report.text(where, name, a, b)
        return
    for x, y in zip(na, nb):
        report.number(where, name, float(x), float(y))


def walk(report, where, name, a, b):
    if isinstance(a, dict) and isinstance(b, dict):
        if a.keys() != b.keys():
            report.text(where, name, sorted(a), sorted(b))
        for k in a:
            if k in b:
                walk(report, f"{where}.{k}", k, a[k], b[k])
    elif isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            report.text(where, name, len(a), len(b))
        for i, (x, y) in enumerate(zip(a, b)):
            walk(report, f"{where}[{i}]", name, x, y)
    elif isinstance(a, (int, float)) and isinstance(b, (int, float)) and not isinstance(a, bool):
        report.number(where, name, float(a), float(b))
    elif isinstance(a, str) and isinstance(b, str):
        cells(report, where, name, a, b)
    elif a != b:
        report.text(where, name, a, b)


def compare(old, new, report):
    if old.endswith(".json"):
        walk(report, old, "", json.load(open(old)), json.load(open(new)))
    elif old.endswith(".csv"):
        ra, rb = list(csv.reader(open(old))), list(csv.reader(open(new)))
        if len(ra) != len(rb):
            report.text(old, "rows", len(ra), len(rb))
        header = ra[0] if ra else []
        for i, (x, y) in enumerate(zip(ra, rb)):
            if len(x) != len(y):
                report.text(f"{old}:{i + 1}", "columns", x, y)
                continue
            for j, (u, v) in enumerate(zip(x, y)):
                cells(report, f"{old}:{i + 1}", header[j] if j < len(header) else j, u, v)
    else:
        la, lb = open(old).read().splitlines(), open(new).read().splitlines()
        if len(la) != len(lb):
            report.text(old, "lines", len(la), len(lb))
        for i, (x, y) in enumerate(zip(la, lb)):
            cells(report, f"{old}:{i + 1}", "", x, y)


def main():
    args = sys.argv[1:]
    if not args or len(args) % 2:
        sys.exit(__doc__)
    report = Report()
    for old, new in zip(args[::2], args[1::2]):
        compare(old, new, report)
    print(f"numbers changed: {report.changed}; largest relative change "
          f"{report.worst[1e-8]:.2e} (estimates, limit 1e-8), {report.worst[1e-6]:.2e} (intervals and p, limit 1e-6)")
    for line in report.bad[:50]:
        print("  " + line)
    if report.bad:
        print(f"{len(report.bad)} cells beyond tolerance or with changed text")
        sys.exit(1)
    print("all within tolerance; text identical")


if __name__ == "__main__":
    main()
