"""Writes the invented data sets of the worked documents.

Every number here is invented for teaching: no animal, plot or machine was
measured. The generator is seeded, so rerunning it gives the same files:

    python3 worked/data/make_data.py

It needs only Python's standard library.
"""

import csv
import os
import random

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


if __name__ == "__main__":
    blight()
    beet_pilot()
    batches()
    rations()
    machines()
    clinics()
