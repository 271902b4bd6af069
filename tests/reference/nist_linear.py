#!/usr/bin/env python3
"""NIST StRD linear least-squares regression sets as covey fixtures, each certified value
checked by exact rational least squares on the data (standard library only).

Source: NIST Statistical Reference Datasets, linear regression (Norris, Pontius, NoInt1,
NoInt2, Filip, Longley, Wampler1-5): data and certified values as NIST publishes them in
its .dat files. NIST's site could not be reached from the machine this was written on, so
the numbers below were transcribed from copies of those files; Norris's data are read from
tests/reference/nist/Norris.csv, which nist_convert.py took from the copy of Norris.dat in
the scipy wheel. A transcription error cannot pass: `verify` recomputes every certified
value exactly from the data (fractions, no rounding) and requires agreement to the 15
significant digits NIST prints, so a wrong data value or a wrong certified digit stops the
script.

Run from the repository root:
    python3 tests/reference/nist_linear.py
It writes <Name>.csv (columns x... then y) and <Name>.json (certified values as NIST
prints them) into tests/reference/nist/.
"""
from decimal import Decimal, getcontext
from fractions import Fraction as Q
import json
import os
import re

getcontext().prec = 60
HERE = os.path.join(os.path.dirname(os.path.abspath(__file__)), "nist")

WAMPLER_X = [str(i) for i in range(21)]
PONTIUS_X = [str(150000 * k) for k in range(1, 21)] * 2

SETS = {
    "Norris": {
        "difficulty": "lower", "degree": 1, "columns": ["x"],
        "beta": [("-0.262323073774029", "0.232818234301152"),
                 ("1.00211681802045", "0.429796848199937E-03")],
        "residual_sd": "0.884796396144373", "r_squared": "0.999993745883712",
        "regression": ("1", "4255954.13232369", "4255954.13232369", "5436385.54079785"),
        "residual": ("34", "26.6173985294224", "0.782864662630069"),
    },
    "Pontius": {
        "difficulty": "lower", "degree": 2, "columns": ["x"],
        "x": PONTIUS_X,
        "y": """.11019 .21956 .32949 .43899 .54803 .65694 .76562 .87487 .98292 1.09146
                1.20001 1.30822 1.41599 1.52399 1.63194 1.73947 1.84646 1.95392 2.06128
                2.16844 .11052 .22018 .32939 .43886 .54798 .65739 .76596 .87474 .98300
                1.09150 1.20004 1.30818 1.41613 1.52408 1.63159 1.73965 1.84696 1.95445
                2.06177 2.16829""".split(),
        "beta": [("0.673565789473684E-03", "0.107938612033077E-03"),
                 ("0.732059160401003E-06", "0.157817399981659E-09"),
                 ("-0.316081871345029E-14", "0.486652849992036E-16")],
        "residual_sd": "0.205177424076185E-03", "r_squared": "0.999999900178537",
        "regression": ("2", "15.6040343244198", "7.80201716220991", "185330865.995752"),
        "residual": ("37", "0.155761768796992E-05", "0.420977753505385E-07"),
    },
    "NoInt1": {
        "difficulty": "average", "degree": 1, "columns": ["x"], "intercept": False,
        "x": [str(v) for v in range(60, 71)], "y": [str(v) for v in range(130, 141)],
        "beta": [("2.07438016528926", "0.165289256198347E-01")],
        "residual_sd": "3.56753034006338", "r_squared": "0.999365492298663",
        "regression": ("1", "200457.727272727", "200457.727272727", "15750.2500000000"),
        "residual": ("10", "127.272727272727", "12.7272727272727"),
    },
    "NoInt2": {
        "difficulty": "average", "degree": 1, "columns": ["x"], "intercept": False,
        "x": ["4", "5", "6"], "y": ["3", "4", "4"],
        "beta": [("0.727272727272727", "0.420827318078432E-01")],
        "residual_sd": "0.369274472937998", "r_squared": "0.993348115299335",
        "regression": ("1", "40.7272727272727", "40.7272727272727", "298.666666666667"),
        "residual": ("2", "0.272727272727273", "0.136363636363636"),
    },
    "Filip": {
        "difficulty": "higher", "degree": 10, "columns": ["x"],
        "x": """-6.860120914 -4.324130045 -4.358625055 -4.358426747 -6.955852379 -6.661145254
                -6.355462942 -6.118102026 -7.115148017 -6.815308569 -6.519993057 -6.204119983
                -5.853871964 -6.109523091 -5.79832982 -5.482672118 -5.171791386 -4.851705903
                -4.517126416 -4.143573228 -3.709075441 -3.499489089 -6.300769497 -5.953504836
                -5.642065153 -5.031376979 -4.680685696 -4.329846955 -3.928486195 -8.56735134
                -8.363211311 -8.107682739 -7.823908741 -7.522878745 -7.218819279 -6.920818754
                -6.628932138 -6.323946875 -5.991399828 -8.781464495 -8.663140179 -8.473531488
                -8.247337057 -7.971428747 -7.676129393 -7.352812702 -7.072065318 -6.774174009
                -6.478861916 -6.159517513 -6.835647144 -6.53165267 -6.224098421 -5.910094889
                -5.598599459 -5.290645224 -4.974284616 -4.64454848 -4.290560426 -3.885055584
                -3.408378962 -3.13200249 -8.726767166 -8.66695597 -8.511026475 -8.165388579
                -7.886056648 -7.588043762 -7.283412422 -6.995678626 -6.691862621 -6.392544977
                -6.067374056 -6.684029655 -6.378719832 -6.065855188 -5.752272167 -5.132414673
                -4.811352704 -4.098269308 -3.66174277 -3.2644011""".split(),
        "y": """0.8116 0.9072 0.9052 0.9039 0.8053 0.8377 0.8667 0.8809 0.7975 0.8162 0.8515
                0.8766 0.8885 0.8859 0.8959 0.8913 0.8959 0.8971 0.9021 0.909 0.9139 0.9199
                0.8692 0.8872 0.89 0.891 0.8977 0.9035 0.9078 0.7675 0.7705 0.7713 0.7736
                0.7775 0.7841 0.7971 0.8329 0.8641 0.8804 0.7668 0.7633 0.7678 0.7697 0.77
                0.7749 0.7796 0.7897 0.8131 0.8498 0.8741 0.8061 0.846 0.8751 0.8856 0.8919
                0.8934 0.894 0.8957 0.9047 0.9129 0.9209 0.9219 0.7739 0.7681 0.7665 0.7703
                0.7702 0.7761 0.7809 0.7961 0.8253 0.8602 0.8809 0.8301 0.8664 0.8834 0.8898
                0.8964 0.8963 0.9074 0.9119 0.9228""".split(),
        "beta": [("-1467.48961422980", "298.084530995537"),
                 ("-2772.17959193342", "559.779865474950"),
                 ("-2316.37108160893", "466.477572127796"),
                 ("-1127.97394098372", "227.204274477751"),
                 ("-354.478233703349", "71.6478660875927"),
                 ("-75.1242017393757", "15.2897178747400"),
                 ("-10.8753180355343", "2.23691159816033"),
                 ("-1.06221498588947", "0.221624321934227"),
                 ("-0.670191154593408E-01", "0.142363763154724E-01"),
                 ("-0.246781078275479E-02", "0.535617408889821E-03"),
                 ("-0.402962525080404E-04", "0.896632837373868E-05")],
        "residual_sd": "0.334801051324544E-02", "r_squared": "0.996727416185620",
        "regression": ("10", "0.242391619837339", "0.242391619837339E-01", "2162.43954511489"),
        "residual": ("71", "0.795851382172941E-03", "0.112091743968020E-04"),
    },
    "Longley": {
        "difficulty": "higher", "degree": 1, "columns": ["x1", "x2", "x3", "x4", "x5", "x6"],
        "rows": """83.0 234289 2356 1590 107608 1947 60323
                   88.5 259426 2325 1456 108632 1948 61122
                   88.2 258054 3682 1616 109773 1949 60171
                   89.5 284599 3351 1650 110929 1950 61187
                   96.2 328975 2099 3099 112075 1951 63221
                   98.1 346999 1932 3594 113270 1952 63639
                   99.0 365385 1870 3547 115094 1953 64989
                   100.0 363112 3578 3350 116219 1954 63761
                   101.2 397469 2904 3048 117388 1955 66019
                   104.6 419180 2822 2857 118734 1956 67857
                   108.4 442769 2936 2798 120445 1957 68169
                   110.8 444546 4681 2637 121950 1958 66513
                   112.6 482704 3813 2552 123366 1959 68655
                   114.2 502601 3931 2514 125368 1960 69564
                   115.7 518173 4806 2572 127852 1961 69331
                   116.9 554894 4007 2827 130081 1962 70551""",
        "beta": [("-3482258.63459582", "890420.383607373"),
                 ("15.0618722713733", "84.9149257747669"),
                 ("-0.358191792925910E-01", "0.334910077722432E-01"),
                 ("-2.02022980381683", "0.488399681651699"),
                 ("-1.03322686717359", "0.214274163161675"),
                 ("-0.511041056535807E-01", "0.226073200069370"),
                 ("1829.15146461355", "455.478499142212")],
        "residual_sd": "304.854073561965", "r_squared": "0.995479004577296",
        "regression": ("6", "184172401.944494", "30695400.3240823", "330.285339234588"),
        "residual": ("9", "836424.055505915", "92936.0061673238"),
    },
    "Wampler1": {
        "difficulty": "average", "degree": 5, "columns": ["x"], "x": WAMPLER_X,
        "y": """1 6 63 364 1365 3906 9331 19608 37449 66430 111111 177156 271453 402234
                579195 813616 1118481 1508598 2000719 2613660 3368421""".split(),
        "beta": [("1.00000000000000", "0.000000000000000")] * 6,
        "residual_sd": "0.000000000000000", "r_squared": "1.00000000000000",
        "regression": ("5", "18814317208116.7", "3762863441623.33", "Infinity"),
        "residual": ("15", "0.000000000000000", "0.000000000000000"),
    },
    "Wampler2": {
        "difficulty": "average", "degree": 5, "columns": ["x"], "x": WAMPLER_X,
        "y": """1.00000 1.11111 1.24992 1.42753 1.65984 1.96875 2.38336 2.94117 3.68928
                4.68559 6.00000 7.71561 9.92992 12.75603 16.32384 20.78125 26.29536
                33.05367 41.26528 51.16209 63.00000""".split(),
        "beta": [("1.00000000000000", "0.000000000000000"),
                 ("0.100000000000000", "0.000000000000000"),
                 ("0.100000000000000E-01", "0.000000000000000"),
                 ("0.100000000000000E-02", "0.000000000000000"),
                 ("0.100000000000000E-03", "0.000000000000000"),
                 ("0.100000000000000E-04", "0.000000000000000")],
        "residual_sd": "0.000000000000000", "r_squared": "1.00000000000000",
        "regression": ("5", "6602.91858365167", "1320.58371673033", "Infinity"),
        "residual": ("15", "0.000000000000000", "0.000000000000000"),
    },
    "Wampler3": {
        "difficulty": "higher", "degree": 5, "columns": ["x"], "x": WAMPLER_X,
        "y": """760 -2042 2111 -1684 3888 1858 11379 17560 39287 64382 113159 175108 273291
                400186 581243 811568 1121004 1506550 2002767 2611612 3369180""".split(),
        "beta": [("1.00000000000000", "2152.32624678170"),
                 ("1.00000000000000", "2363.55173469681"),
                 ("1.00000000000000", "779.343524331583"),
                 ("1.00000000000000", "101.475507550350"),
                 ("1.00000000000000", "5.64566512170752"),
                 ("1.00000000000000", "0.112324854679312")],
        "residual_sd": "2360.14502379268", "r_squared": "0.999995559025820",
        "regression": ("5", "18814317208116.7", "3762863441623.33", "675524.458240122"),
        "residual": ("15", "83554268.0000000", "5570284.53333333"),
    },
    "Wampler4": {
        "difficulty": "higher", "degree": 5, "columns": ["x"], "x": WAMPLER_X,
        "y": """75901 -204794 204863 -204436 253665 -200894 214131 -185192 221249 -138370
                315911 -27644 455253 197434 783995 608816 1370781 1303798 2205519 2408860
                3444321""".split(),
        "beta": [("1.00000000000000", "215232.624678170"),
                 ("1.00000000000000", "236355.173469681"),
                 ("1.00000000000000", "77934.3524331583"),
                 ("1.00000000000000", "10147.5507550350"),
                 ("1.00000000000000", "564.566512170752"),
                 ("1.00000000000000", "11.2324854679312")],
        "residual_sd": "236014.502379268", "r_squared": "0.957478440825662",
        "regression": ("5", "18814317208116.7", "3762863441623.33", "67.5524458240122"),
        "residual": ("15", "835542680000.000", "55702845333.3333"),
    },
    "Wampler5": {
        "difficulty": "higher", "degree": 5, "columns": ["x"], "x": WAMPLER_X,
        "y": """7590001 -20479994 20480063 -20479636 25231365 -20476094 20489331 -20460392
                18417449 -20413570 20591111 -20302844 18651453 -20077766 21059195 -19666384
                26348481 -18971402 22480719 -17866340 10958421""".split(),
        "beta": [("1.00000000000000", "21523262.4678170"),
                 ("1.00000000000000", "23635517.3469681"),
                 ("1.00000000000000", "7793435.24331583"),
                 ("1.00000000000000", "1014755.07550350"),
                 ("1.00000000000000", "56456.6512170752"),
                 ("1.00000000000000", "1123.24854679312")],
        "residual_sd": "23601450.2379268", "r_squared": "0.224668921574940E-02",
        "regression": ("5", "18814317208116.7", "3762863441623.33", "0.675524458240122E-02"),
        "residual": ("15", "0.835542680000000E+16", "557028453333333"),
    },
}


def rows_of(name, s):
    """(predictor rows as decimal strings, response strings)."""
    if name == "Norris":
        with open(os.path.join(HERE, "Norris.csv")) as f:
            lines = f.read().split()[1:]
        pairs = [l.split(",") for l in lines]
        return [[x] for x, _ in pairs], [y for _, y in pairs]
    if "rows" in s:
        table = [l.split() for l in s["rows"].strip().splitlines()]
        return [r[:-1] for r in table], [r[-1] for r in table]
    return [[x] for x in s["x"]], s["y"]


def terms(s):
    cols = s["columns"]
    if s["degree"] > 1:
        return ["x"] + ["x^%d" % k for k in range(2, s["degree"] + 1)]
    return cols


def design(s, xs):
    icpt = s.get("intercept", True)
    out = []
    for r in xs:
        vals = [Q(v) for v in r]
        row = [Q(1)] if icpt else []
        if s["degree"] > 1:
            row += [vals[0] ** k for k in range(1, s["degree"] + 1)]
        else:
            row += vals
        out.append(row)
    return out


def solve(a, b):
    n = len(a)
    m = [row[:] + [bb] for row, bb in zip(a, b)]
    for c in range(n):
        piv = next(r for r in range(c, n) if m[r][c] != 0)
        m[c], m[piv] = m[piv], m[c]
        pv = m[c][c]
        m[c] = [x / pv for x in m[c]]
        for r in range(n):
            if r != c and m[r][c] != 0:
                f = m[r][c]
                m[r] = [x - f * y for x, y in zip(m[r], m[c])]
    return [m[r][n] for r in range(n)]


def sqrt_q(q):
    return Decimal(q.numerator) / Decimal(q.denominator) if q == 0 else (
        Decimal(q.numerator) / Decimal(q.denominator)).sqrt()


def agrees(exact, printed):
    """Whether the exact value (Fraction or Decimal) rounds to NIST's printed digits: within
    half a unit of the 15th significant digit (and 0 exactly for a printed 0)."""
    p = Decimal(printed)
    e = Decimal(exact.numerator) / Decimal(exact.denominator) if isinstance(exact, Q) else exact
    if p == 0:
        return e == 0
    unit = Decimal(10) ** (p.adjusted() - 14)
    return abs(e - p) <= unit / 2 * Decimal("1.000001")


def verify(name, s, xs, ys):
    x = design(s, xs)
    y = [Q(v) for v in ys]
    p = len(x[0])
    n = len(x)
    g = [[sum(r[a] * r[b] for r in x) for b in range(p)] for a in range(p)]
    xy = [sum(r[a] * yy for r, yy in zip(x, y)) for a in range(p)]
    b = solve(g, xy)
    fitted = [sum(r[k] * b[k] for k in range(p)) for r in x]
    rss = sum((yy - f) ** 2 for yy, f in zip(y, fitted))
    icpt = s.get("intercept", True)
    ybar = sum(y) / n if icpt else Q(0)
    tss = sum((yy - ybar) ** 2 for yy in y)
    df_res = n - p
    s2 = rss / df_res
    ginv_diag = [solve(g, [Q(int(i == j)) for i in range(p)])[j] for j in range(p)]
    bad = []
    checks = []
    for j, (est, sd) in enumerate(s["beta"]):
        checks.append(("B%d" % j, b[j], est))
        checks.append(("SD(B%d)" % j, sqrt_q(s2 * ginv_diag[j]), sd))
    checks.append(("residual SD", sqrt_q(s2), s["residual_sd"]))
    checks.append(("R-squared", 1 - rss / tss, s["r_squared"]))
    df_reg = p - (1 if icpt else 0)
    reg = tss - rss
    checks.append(("regression SS", reg, s["regression"][1]))
    checks.append(("regression MS", reg / df_reg, s["regression"][2]))
    checks.append(("residual SS", rss, s["residual"][1]))
    checks.append(("residual MS", s2, s["residual"][2]))
    if s["regression"][3] == "Infinity":
        if rss != 0:
            bad.append("F: certified infinite, but the residual SS is %s" % rss)
    else:
        checks.append(("F", (reg / df_reg) / s2, s["regression"][3]))
    if int(s["regression"][0]) != df_reg or int(s["residual"][0]) != df_res:
        bad.append("degrees of freedom")
    for what, exact, printed in checks:
        if not agrees(exact, printed):
            bad.append("%s: exact %s, certified %s" % (what, float(exact), printed))
    if bad:
        raise SystemExit("%s: certified values not reproduced:\n  %s" % (name, "\n  ".join(bad)))
    return len(checks)


JSON_NUMBER = re.compile(r"-?(?:0|[1-9]\d*)(?:\.\d+)?(?:[eE][-+]?\d+)?\Z")


def json_number(v):
    """NIST's digit string as a JSON number, digits unchanged (e.g. .11 -> 0.11)."""
    t = v[1:] if v.startswith("+") else v
    if t.startswith("."):
        t = "0" + t
    if t.startswith("-."):
        t = "-0" + t[1:]
    if t.endswith("."):
        t = t[:-1]
    if not JSON_NUMBER.match(t):
        raise ValueError(t)
    return t


def write(name, s, xs, ys):
    cols = s["columns"]
    with open(os.path.join(HERE, name + ".csv"), "w") as f:
        f.write(",".join(cols + ["y"]) + "\n")
        for r, yv in zip(xs, ys):
            f.write(",".join([json_number(v) for v in r] + [json_number(yv)]) + "\n")
    names = (["intercept"] if s.get("intercept", True) else []) + terms(s)
    model = "y on " + " + ".join(terms(s)) + ("" if s.get("intercept", True) else " without intercept")
    body = [
        '  "source": %s' % json.dumps("NIST Statistical Reference Datasets, %s (certified values), checked by exact rational least squares in nist_linear.py" % name),
        '  "difficulty": %s' % json.dumps(s["difficulty"]),
        '  "model": %s' % json.dumps(model),
        '  "coefficients": [\n%s\n  ]' % ",\n".join(
            '    {"term": %s, "estimate": %s, "se": %s}' % (json.dumps(t), json_number(e), json_number(sd))
            for t, (e, sd) in zip(names, s["beta"])),
        '  "residual_sd": %s' % json_number(s["residual_sd"]),
        '  "r_squared": %s' % json_number(s["r_squared"]),
        '  "regression_df": %s' % s["regression"][0],
        '  "regression_ss": %s' % json_number(s["regression"][1]),
        '  "regression_ms": %s' % json_number(s["regression"][2]),
        '  "f": %s' % ("null" if s["regression"][3] == "Infinity" else json_number(s["regression"][3])),
        '  "residual_df": %s' % s["residual"][0],
        '  "residual_ss": %s' % json_number(s["residual"][1]),
        '  "residual_ms": %s' % json_number(s["residual"][2]),
    ]
    text = "{\n" + ",\n".join(body) + "\n}\n"
    json.loads(text)
    with open(os.path.join(HERE, name + ".json"), "w") as f:
        f.write(text)


def main():
    for name, s in SETS.items():
        xs, ys = rows_of(name, s)
        k = verify(name, s, xs, ys)
        write(name, s, xs, ys)
        print("%-9s %3d rows: all %d certified values reproduced exactly" % (name, len(ys), k))


if __name__ == "__main__":
    main()
