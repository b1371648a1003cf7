#!/usr/bin/env python3
"""A plain line-by-line regex reader: the peer settle's parsers are measured against.

It reads the same two synthetic files as `parse_throughput.rs` and keeps the same values
(one Python list of floats per series), the way a user's own post-processing script would:
the tarn verbose log with the regexes of `tarn_verbose.toml` tried in order on every line,
and the whitespace table with `str.split` and `float`. Not optimised on purpose; it is the
"plain script" of the performance targets (DEVELOPERS.md, "Benchmarks").

usage: peer.py lines FILE | peer.py table FILE   (prints "<records> records <values> values")
"""

import re
import sys

STEP = re.compile(r"^\[step\s+(?P<iteration>\d+)\]\s+time\s+(?P<time>\S+)\s+dt\s+(?P<dt>\S+)")
ANCHORS = {
    "table": re.compile(r"^\s+equation\s+initial"),
    "forces": re.compile(r"^\s+forces"),
    "moments": re.compile(r"^\s+moments"),
}
RULES = [
    # (name, regex, anchor, repeat)
    ("courant", re.compile(r"^\s+courant\s+mean\s+(?P<mean>\S+)\s+max\s+(?P<max>\S+)"), None, "last"),
    ("residual", re.compile(
        r"^\s+(?P<name>[A-Za-z_]\w*)\s+(?P<value>\S+)\s+(?P<final>\S+)\s+(?P<sweeps>\d+)\s*$"),
     "table", "last"),
    ("continuity", re.compile(
        r"^\s+continuity\s+local\s+(?P<local>\S+)\s+global\s+(?P<global>\S+)\s+cumulative\s+(?P<cumulative>\S+)"),
     None, "last"),
    ("force", re.compile(r"^\s+Total\s+\(\s*(?P<x>\S+)\s+(?P<y>\S+)\s+(?P<z>\S+)\s*\)"), "forces", "first"),
    ("moment", re.compile(r"^\s+Total\s+\(\s*(?P<x>\S+)\s+(?P<y>\S+)\s+(?P<z>\S+)\s*\)"), "moments", "last"),
    ("", re.compile(r"^\s+coefficients\s+Cd\s+(?P<Cd>\S+)\s+Cl\s+(?P<Cl>\S+)\s+Cm\s+(?P<Cm>\S+)"), None, "last"),
    ("yplus", re.compile(r"^\s+y\+\s+min\s+(?P<min>\S+)\s+max\s+(?P<max>\S+)\s+mean\s+(?P<mean>\S+)"), None, "last"),
    ("massflow", re.compile(r"^\s+mass flow\s+in\s+(?P<in>\S+)\s+out\s+(?P<out>\S+)"), None, "last"),
    ("wall", re.compile(r"^\s+timing\s+step\s+(?P<step>\S+)\s+s\s+total\s+(?P<total>\S+)\s+s"), None, "last"),
]
# A word each rule's lines contain (residual rows: any line; the anchor narrows them).
KEYS = {"courant": "courant", "residual": "", "continuity": "continuity", "force": "Total",
        "moment": "Total", "": "coefficients", "yplus": "y+", "massflow": "mass flow",
        "wall": "timing"}
NOTICE = re.compile(r"^\s*notice:\s*(?P<message>.*)")


def series_of(rule, m):
    """(series name, value text) pairs of one match, named as the definition names them."""
    name, _, _, _ = rule
    groups = m.groupdict()
    if name == "residual":
        eq = groups["name"]
        return [(eq, groups["value"]), (eq + "/final", groups["final"]), (eq + "/sweeps", groups["sweeps"])]
    return [((name + "/" + g) if name else g, v) for g, v in groups.items()]


def read_lines(path):
    series = {}
    iterations = []
    events = []
    record = None
    seen = set()
    for line in open(path, "r", encoding="utf-8", errors="replace"):
        if line.startswith("[step"):
            m = STEP.match(line)
            if m:
                if record is not None:
                    for k, v in record.items():
                        series.setdefault(k, []).append(v)
                iterations.append(int(m.group("iteration")))
                record = {"dt": float(m.group("dt"))}
                seen = set()
                continue
        if record is not None:
            for rule in RULES:
                name, rx, anchor, repeat = rule
                # A cheap word test before the regex, as a sensible script does.
                if anchor is not None and anchor not in seen:
                    continue
                if KEYS[name] not in line:
                    continue
                m = rx.match(line)
                if m:
                    for k, v in series_of(rule, m):
                        if repeat == "first" and k in record:
                            continue
                        record[k] = float(v)
        if "notice" in line:
            n = NOTICE.match(line)
            if n:
                events.append(n.group("message"))
        for a, rx in ANCHORS.items():
            if a not in seen and rx.match(line):
                seen.add(a)
    if record is not None:
        for k, v in record.items():
            series.setdefault(k, []).append(v)
    return len(iterations), sum(len(v) for v in series.values())


def read_table(path):
    columns = None
    data = []
    for line in open(path, "r", encoding="utf-8", errors="replace"):
        cells = line.split()
        if not cells:
            continue
        if cells[0].startswith("#"):
            cells = line.lstrip()[1:].split()
            if len(cells) > 1:
                columns = cells
                data = [[] for _ in columns]
            continue
        if columns is None or len(cells) != len(columns):
            continue
        try:
            values = [float(c) for c in cells]
        except ValueError:
            continue
        for col, v in zip(data, values):
            col.append(v)
    records = len(data[0]) if data else 0
    return records, records * (len(data) - 1)


def main():
    if len(sys.argv) != 3 or sys.argv[1] not in ("lines", "table"):
        sys.exit(__doc__)
    records, values = (read_lines if sys.argv[1] == "lines" else read_table)(sys.argv[2])
    print(f"{records} records {values} values")


if __name__ == "__main__":
    main()
