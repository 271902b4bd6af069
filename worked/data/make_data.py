"""Writes the invented data sets of the worked documents.

Every number here is invented for teaching: no animal, plot or machine was
measured. The generator is seeded, so rerunning it gives the same files:

    python3 worked/data/make_data.py

It needs only Python's standard library.
"""

import csv
import datetime
import math
import os
import random
import sqlite3
import zipfile
from xml.sax.saxutils import escape

HERE = os.path.dirname(os.path.abspath(__file__))


def write(name, header, rows):
    with open(os.path.join(HERE, name), "w", newline="") as f:
        w = csv.writer(f, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)


def rations():
    """Three rations fed to weaned piglets for six weeks; final weight
    adjusted for the weight at the start. Parallel slopes by construction."""
    rng = random.Random(20261201)
    effect = {"barley": 0.0, "maize": 1.8, "maize+soy": 3.4}
    rows = []
    pen = 0
    for ration, shift in effect.items():
        for _ in range(10):
            pen += 1
            start = round(rng.gauss(11.5, 1.6), 1)
            final = 29.0 + 1.55 * (start - 11.5) + shift + rng.gauss(0, 1.3)
            rows.append([f"P{pen:02d}", ration, start, round(final, 1)])
    # One pen lost its record of the final weighing.
    rows[13][3] = ""
    rng.shuffle(rows)
    write("rations.csv", ["pen", "ration", "start_kg", "final_kg"], rows)


def machines():
    """Two cutting machines; surface roughness against sheet thickness.
    Machine B's roughness grows faster with thickness, so the lines cross:
    the slopes differ by construction."""
    rng = random.Random(7041)
    rows = []
    part = 0
    for machine, (a, b) in {"press-A": (1.10, 0.10), "press-B": (0.35, 0.26)}.items():
        for _ in range(22):
            part += 1
            thickness = round(rng.uniform(1.5, 10.0), 2)
            rough = a + b * thickness + rng.gauss(0, 0.22)
            rows.append([f"S{part:03d}", machine, thickness, round(rough, 3)])
    rng.shuffle(rows)
    write("machines.csv", ["sheet", "machine", "thickness_mm", "roughness_um"], rows)


def clinics():
    """A two-arm trial run at three clinics with unequal enrolment; the
    outcome is a symptom score after eight weeks, adjusted for the baseline
    score. Arm effects differ a little between clinics, and the cells are
    unbalanced, so Type I, II and III sums of squares disagree."""
    rng = random.Random(31337)
    sizes = {
        ("north", "control"): 14, ("north", "active"): 6,
        ("river", "control"): 5, ("river", "active"): 13,
        ("hill", "control"): 9, ("hill", "active"): 8,
    }
    clinic_shift = {"north": 0.0, "river": 2.5, "hill": -1.5}
    arm_effect = {("north", "active"): -4.0, ("river", "active"): -1.5, ("hill", "active"): -3.0}
    rows = []
    pid = 0
    for (clinic, arm), n in sizes.items():
        for _ in range(n):
            pid += 1
            base = round(rng.gauss(24 + (3 if clinic == "river" else 0), 4), 0)
            week8 = (6 + 0.7 * base + clinic_shift[clinic]
                     + arm_effect.get((clinic, arm), 0.0) + rng.gauss(0, 2.6))
            rows.append([f"T{pid:03d}", clinic, arm, int(base), round(week8, 1)])
    rng.shuffle(rows)
    write("clinics.csv", ["patient", "clinic", "arm", "baseline", "week8"], rows)


def batches():
    """Monthly batches of a greenhouse procedure: three fertiliser blends,
    yield per plant adjusted for plant height at transplanting. The
    November batch behaves; in the December batch blend C's yield rises
    much faster with height, so the procedure's slope gate fails."""
    for name, seed, c_slope in (("batch-2026-11", 1101, 0.060), ("batch-2026-12", 1201, 0.150)):
        rng = random.Random(seed)
        rows = []
        plant = 0
        for blend, shift in {"A": 0.0, "B": 0.25, "C": 0.45}.items():
            for _ in range(12):
                plant += 1
                height = round(rng.uniform(8.0, 20.0), 1)
                slope = c_slope if blend == "C" else 0.060
                yield_kg = 1.2 + slope * (height - 14.0) + shift + rng.gauss(0, 0.12)
                rows.append([f"G{plant:03d}", blend, height, round(yield_kg, 3)])
        rng.shuffle(rows)
        write(f"{name}.csv", ["plant", "blend", "height_cm", "yield_kg"], rows)


def beet_pilot():
    """A pilot field trial of two seed coatings for sugar beet against uncoated seed, six
    plots each; the root yield of each plot adjusted for the same plot's yield in the
    previous season, which carries the field's fertility from year to year."""
    rng = random.Random(4411)
    gain = {"uncoated": 0.0, "coat-A": 1.5, "coat-B": 3.0}
    rows = []
    plot = 0
    for coating, shift in gain.items():
        for _ in range(6):
            plot += 1
            previous = round(rng.gauss(68.0, 6.0), 1)
            root = 70.0 + 0.8 * (previous - 68.0) + shift + rng.gauss(0, 3.5)
            rows.append([f"B{plot:02d}", coating, previous, round(root, 1)])
    rng.shuffle(rows)
    write("beet-pilot.csv", ["plot", "coating", "previous_t_ha", "roots_t_ha"], rows)


def blight():
    """A field trial of three fungicide programmes against late blight in potatoes, with
    an untreated control, on two varieties (an early one and a late one that stands longer
    in the field, so the disease and the sprays matter more to it), five plots of each
    combination. Marketable yield is adjusted for the plant stand counted at emergence.
    Blight strikes the untreated plots in patches, so their yields spread almost four
    times as widely as the sprayed plots': unequal spread by construction. Two plots were harvested
    on half their area (their harvested area is recorded)."""
    rng = random.Random(13)
    gain = {"untreated": 0.0, "prog-A": 4.0, "prog-B": 6.0, "prog-C": 1.5}
    spread = {"untreated": 4.5, "prog-A": 1.2, "prog-B": 1.2, "prog-C": 1.2}
    late = {"early": 0.0, "late": 1.0}
    rows = []
    plot = 0
    for variety, is_late in late.items():
        for programme, g in gain.items():
            for _ in range(5):
                plot += 1
                stand = rng.randint(32, 48)
                # The late variety yields more, and gains three times as much from each
                # programme as the early one (half the nominal gain, and one and a half).
                y = 38.0 + 0.55 * (stand - 40) + 2.0 * is_late + g * (0.5 + 1.0 * is_late)
                y += rng.gauss(0, spread[programme])
                rows.append([f"K{plot:02d}", variety, programme, stand, round(y, 1), 20])
    # Two plots were harvested on half their area.
    rows[6][5] = 10
    rows[27][5] = 10
    rng.shuffle(rows)
    write(
        "blight.csv",
        ["plot", "variety", "programme", "stand", "yield_t_ha", "harvested_m2"],
        rows,
    )


def column_letters(c):
    """0 -> A, 25 -> Z, 26 -> AA."""
    out = ""
    c += 1
    while c:
        c, r = divmod(c - 1, 26)
        out = chr(65 + r) + out
    return out


class ErrorValue(str):
    """An error value of a spreadsheet cell, such as #N/A."""


def write_xlsx(path, sheets):
    """A minimal Office Open XML workbook at path, written with the standard library so
    that the file is the same byte for byte at every run (fixed times in the archive); the
    data-source benchmark (tests/bench/make_sources.py) writes its workbook with it too. sheets: a
    list of (sheet name, rows); a cell is an ErrorValue (an error cell), a str (shared
    string), an int or float (number),
    a datetime.date (a number with a date format, as spreadsheet programs store dates) or
    None (no cell)."""
    strings, index = [], {}
    epoch = datetime.date(1899, 12, 30)

    def cell(ref, v):
        if v is None:
            return ""
        if isinstance(v, ErrorValue):
            return f'<c r="{ref}" t="e"><v>{escape(v)}</v></c>'
        if isinstance(v, str):
            if v not in index:
                index[v] = len(strings)
                strings.append(v)
            return f'<c r="{ref}" t="s"><v>{index[v]}</v></c>'
        if isinstance(v, datetime.date):
            return f'<c r="{ref}" s="1"><v>{(v - epoch).days}</v></c>'
        return f'<c r="{ref}"><v>{v!r}</v></c>'

    parts = {}
    for k, (sheet, rows) in enumerate(sheets, start=1):
        body = []
        for r, row in enumerate(rows, start=1):
            cells = "".join(cell(f"{column_letters(c)}{r}", v) for c, v in enumerate(row))
            body.append(f'<row r="{r}">{cells}</row>')
        parts[f"xl/worksheets/sheet{k}.xml"] = (
            '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
            '<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
            f'<sheetData>{"".join(body)}</sheetData></worksheet>'
        )
    ns = "http://schemas.openxmlformats.org"
    rel = f"{ns}/officeDocument/2006/relationships"
    parts["xl/sharedStrings.xml"] = (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        f'<sst xmlns="{ns}/spreadsheetml/2006/main" count="{len(strings)}" uniqueCount="{len(strings)}">'
        + "".join(f"<si><t>{escape(t)}</t></si>" for t in strings)
        + "</sst>"
    )
    parts["xl/styles.xml"] = (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        f'<styleSheet xmlns="{ns}/spreadsheetml/2006/main">'
        '<fonts count="1"><font><sz val="11"/><name val="Calibri"/></font></fonts>'
        '<fills count="1"><fill><patternFill patternType="none"/></fill></fills>'
        '<borders count="1"><border/></borders>'
        '<cellStyleXfs count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0"/></cellStyleXfs>'
        '<cellXfs count="2"><xf numFmtId="0" fontId="0" fillId="0" borderId="0" xfId="0"/>'
        '<xf numFmtId="14" fontId="0" fillId="0" borderId="0" xfId="0" applyNumberFormat="1"/></cellXfs>'
        "</styleSheet>"
    )
    listed = "".join(
        f'<sheet name="{escape(n)}" sheetId="{k}" r:id="rId{k}"/>'
        for k, (n, _) in enumerate(sheets, start=1)
    )
    parts["xl/workbook.xml"] = (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        f'<workbook xmlns="{ns}/spreadsheetml/2006/main" xmlns:r="{rel}">'
        f"<sheets>{listed}</sheets></workbook>"
    )
    n = len(sheets)
    links = "".join(
        f'<Relationship Id="rId{k}" Type="{rel}/worksheet" Target="worksheets/sheet{k}.xml"/>'
        for k in range(1, n + 1)
    )
    links += f'<Relationship Id="rId{n + 1}" Type="{rel}/sharedStrings" Target="sharedStrings.xml"/>'
    links += f'<Relationship Id="rId{n + 2}" Type="{rel}/styles" Target="styles.xml"/>'
    parts["xl/_rels/workbook.xml.rels"] = (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        f'<Relationships xmlns="{ns}/package/2006/relationships">{links}</Relationships>'
    )
    parts["_rels/.rels"] = (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        f'<Relationships xmlns="{ns}/package/2006/relationships">'
        f'<Relationship Id="rId1" Type="{rel}/officeDocument" Target="xl/workbook.xml"/>'
        "</Relationships>"
    )
    main = "application/vnd.openxmlformats-officedocument.spreadsheetml"
    overrides = "".join(
        f'<Override PartName="/xl/worksheets/sheet{k}.xml" ContentType="{main}.worksheet+xml"/>'
        for k in range(1, n + 1)
    )
    parts["[Content_Types].xml"] = (
        '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
        f'<Types xmlns="{ns}/package/2006/content-types">'
        '<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
        '<Default Extension="xml" ContentType="application/xml"/>'
        f'<Override PartName="/xl/workbook.xml" ContentType="{main}.sheet.main+xml"/>'
        f"{overrides}"
        f'<Override PartName="/xl/sharedStrings.xml" ContentType="{main}.sharedStrings+xml"/>'
        f'<Override PartName="/xl/styles.xml" ContentType="{main}.styles+xml"/>'
        "</Types>"
    )
    order = ["[Content_Types].xml", "_rels/.rels", "xl/workbook.xml",
             "xl/_rels/workbook.xml.rels", "xl/styles.xml", "xl/sharedStrings.xml"]
    order += sorted(k for k in parts if k.startswith("xl/worksheets/"))
    with zipfile.ZipFile(path, "w") as z:
        for part in order:
            info = zipfile.ZipInfo(part, date_time=(2026, 1, 1, 0, 0, 0))
            info.compress_type = zipfile.ZIP_DEFLATED
            z.writestr(info, parts[part].encode("utf-8"))


def greenhouse():
    """A workbook as a greenhouse team keeps it: three feeding schedules for tomatoes, 12
    plots each; yield per plant adjusted for the plant's height at transplanting. The
    schedules multiply the yield (so their effects are even on the log scale), and taller
    transplants yield more. Sheet "Plan" (notes) comes first; the data are on sheet
    "Harvest", with the harvest date, and one plot whose weighing failed holds the error
    value #N/A, as a spreadsheet shows a failed lookup."""
    rng = random.Random(5)
    effect = {"standard": 0.0, "slow-release": 0.07, "liquid": 0.15}
    rows = []
    plot = 0
    for schedule, shift in effect.items():
        for _ in range(12):
            plot += 1
            height = round(rng.gauss(21.0, 2.6), 1)
            log_yield = math.log(4.2) + 0.035 * (height - 21.0) + shift + rng.gauss(0, 0.07)
            day = datetime.date(2026, 8, 17) + datetime.timedelta(days=rng.randrange(3))
            rows.append([f"T{plot:02d}", schedule, height, round(math.exp(log_yield), 2), day])
    rows[20][3] = ErrorValue("#N/A")
    rng.shuffle(rows)
    plan = [
        ["Tomato feeding trial (invented data for covey's worked examples)"],
        ["Three feeding schedules, 12 plots each, plots assigned at random"],
        ["height_cm: plant height at transplanting; yield_kg: fruit per plant"],
    ]
    write_xlsx(
        os.path.join(HERE, "greenhouse.xlsx"),
        [
            ("Plan", plan),
            ("Harvest", [["plot", "schedule", "height_cm", "yield_kg", "harvested"]] + rows),
        ],
    )


def assays():
    """A laboratory's SQLite file: three extraction methods for lead in soil, 15 soil
    samples each, assigned at random; the recovery of a spiked amount (%) falls with the
    sample's organic matter (%), the covariate. Table samples holds the samples, table runs
    the extractions; two runs were rejected by the analyst and one lost its reading
    (NULL)."""
    rng = random.Random(4471)
    path = os.path.join(HERE, "assays.sqlite")
    if os.path.exists(path):
        os.remove(path)
    con = sqlite3.connect(path)
    con.executescript(
        """
        CREATE TABLE samples (sample_id TEXT PRIMARY KEY, site TEXT, organic_pct REAL);
        CREATE TABLE runs (run_id INTEGER PRIMARY KEY, sample_id TEXT REFERENCES samples,
                           method TEXT, recovery_pct REAL, rejected INTEGER);
        """
    )
    methods = ["acid digest"] * 15 + ["microwave"] * 15 + ["ultrasonic"] * 15
    rng.shuffle(methods)
    effect = {"acid digest": 0.0, "microwave": 3.5, "ultrasonic": -2.0}
    for s, method in enumerate(methods, start=1):
        sample = f"S{s:02d}"
        organic = round(rng.uniform(1.0, 9.0), 1)
        site = rng.choice(["north field", "south field", "orchard"])
        con.execute("INSERT INTO samples VALUES (?, ?, ?)", (sample, site, organic))
        recovery = 96.0 - 1.6 * (organic - 5.0) + effect[method] + rng.gauss(0, 1.4)
        con.execute(
            "INSERT INTO runs VALUES (?, ?, ?, ?, 0)",
            (100 + s, sample, method, round(recovery, 1)),
        )
    con.execute("UPDATE runs SET rejected = 1 WHERE run_id IN (108, 131)")
    con.execute("UPDATE runs SET recovery_pct = NULL WHERE run_id = 119")
    con.commit()
    con.execute("VACUUM")
    con.close()


if __name__ == "__main__":
    greenhouse()
    assays()
    blight()
    beet_pilot()
    batches()
    rations()
    machines()
    clinics()
