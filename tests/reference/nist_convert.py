#!/usr/bin/env python3
"""Convert NIST Statistical Reference Datasets (StRD) into covey test fixtures.

Source: NIST StRD one-way ANOVA sets (SiRstv, SmLs01..SmLs09, AtmWtAg) and the
linear-regression set Norris, as shipped in the test data of the scipy wheel
(scipy/stats/tests/data/nist_anova/*.dat and nist_linregress/Norris.dat).

Only the numbers are taken over: the data go to <Name>.csv (ANOVA: `group,y`;
Norris: `x,y`), the certified values of the ANOVA sets go to <Name>.json with
their digit strings written verbatim as JSON numbers (so no digit is lost or
rounded). Norris's certified values are written, with the other linear
regression sets, by nist_linear.py, which checks each of them exactly.

How to rerun (from the repository root):
    python3 -m pip download --no-deps scipy -d /tmp/scipywheel
    python3 -c "import zipfile,glob; zipfile.ZipFile(glob.glob('/tmp/scipywheel/scipy-*.whl')[0]).extractall('/tmp/scipywheel/x')"
    python3 tests/reference/nist_convert.py /tmp/scipywheel/x
The first argument is the directory the wheel was unzipped into; the second
(optional) is the output directory, default tests/reference/nist.
"""
import json
import os
import re
import sys

ANOVA_SETS = ["SiRstv"] + ["SmLs0%d" % i for i in range(1, 10)] + ["AtmWtAg"]
NUM = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
JSON_NUMBER = re.compile(r"-?(?:0|[1-9]\d*)(?:\.\d+)?(?:[eE][-+]?\d+)?\Z")


def json_number(s):
    """Return the digit string s in a form JSON accepts, digits unchanged."""
    t = s[1:] if s.startswith("+") else s
    if not JSON_NUMBER.match(t):
        raise ValueError("not writable verbatim as a JSON number: %r" % s)
    return t


def difficulty(text):
    m = re.search(r"(Lower|Average|Higher) Level of Difficulty", text)
    if not m:
        raise ValueError("no difficulty found")
    return m.group(1).lower()


def data_rows(lines):
    """Rows of numbers after the line that starts with 'Data:' and names columns."""
    start = None
    for i, line in enumerate(lines):
        if line.startswith("Data:") and not re.search(r"\d", line):
            start = i + 1
    if start is None:
        raise ValueError("no data section")
    rows = []
    for line in lines[start:]:
        parts = line.split()
        if not parts:
            continue
        if not all(re.fullmatch(NUM, p) for p in parts):
            raise ValueError("unexpected data line %r" % line)
        rows.append(parts)
    return rows


def write_json(path, source, diff, pairs):
    body = ['  "source": %s' % json.dumps(source), '  "difficulty": %s' % json.dumps(diff)]
    for key, value in pairs:
        body.append("  %s: %s" % (json.dumps(key), json_number(value)))
    text = "{\n" + ",\n".join(body) + "\n}\n"
    parsed = json.loads(text)
    for key, value in pairs:
        assert parsed[key] == float(value) or parsed[key] == int(value)
    with open(path, "w") as f:
        f.write(text)


def source_of(name):
    return ("NIST Statistical Reference Datasets, %s (certified values), "
            "via the scipy wheel's test data" % name)


def convert_anova(path, name, out):
    text = open(path).read()
    lines = text.splitlines()
    between = within = None
    for line in lines:
        if line.startswith("Between"):
            between = re.findall(NUM, line)
        elif line.startswith("Within"):
            within = re.findall(NUM, line)
    r2 = re.search(r"Certified R-Squared\s+(%s)" % NUM, text).group(1)
    sd = re.search(r"Standard Deviation\s+(%s)" % NUM, text).group(1)
    assert len(between) == 4 and len(within) == 3, (between, within)
    pairs = [
        ("between_df", between[0]), ("between_ss", between[1]), ("between_ms", between[2]),
        ("within_df", within[0]), ("within_ss", within[1]), ("within_ms", within[2]),
        ("f", between[3]), ("r_squared", r2), ("residual_sd", sd),
    ]
    rows = data_rows(lines)
    assert all(len(r) == 2 for r in rows)
    n = int(between[0]) + int(within[0]) + 1
    assert len(rows) == n, (name, len(rows), n)
    with open(os.path.join(out, name + ".csv"), "w") as f:
        f.write("group,y\n")
        for g, y in rows:
            f.write("%d,%s\n" % (int(g), y))
    write_json(os.path.join(out, name + ".json"), source_of(name), difficulty(text), pairs)


def convert_norris(path, out):
    name = "Norris"
    text = open(path).read()
    lines = text.splitlines()
    reg = re.search(r"^Regression\s+(\d+)\s+(%s)\s+(%s)\s+(%s)" % (NUM, NUM, NUM), text, re.M)
    res = re.search(r"^Residual\s+(\d+)\s+(%s)\s+(%s)" % (NUM, NUM), text, re.M)
    rows = data_rows(lines)
    assert len(rows) == int(reg.group(1)) + int(res.group(1)) + 1
    with open(os.path.join(out, name + ".csv"), "w") as f:
        f.write("x,y\n")
        for y, x in rows:  # the file lists y first, then x
            f.write("%s,%s\n" % (x, y))


def main():
    if len(sys.argv) < 2:
        sys.exit(__doc__)
    root = sys.argv[1]
    out = sys.argv[2] if len(sys.argv) > 2 else os.path.join(os.path.dirname(os.path.abspath(__file__)), "nist")
    os.makedirs(out, exist_ok=True)
    data = os.path.join(root, "scipy", "stats", "tests", "data")
    for name in ANOVA_SETS:
        convert_anova(os.path.join(data, "nist_anova", name + ".dat"), name, out)
    convert_norris(os.path.join(data, "nist_linregress", "Norris.dat"), out)


if __name__ == "__main__":
    main()
