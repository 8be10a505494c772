"""Write the example project's data files from one seeded random generator.

The scenario is invented: a hydroponic growing trial, order picking in a warehouse, a
small seed-coating germination test, and a spreadsheet of parcel depot delivery delays
with a date column (written with openpyxl, from the test extra). Running this script again gives byte-identical files
(one numpy Generator with a fixed seed, fixed number formatting, fixed line endings).

    python example_project/make_data.py

The imperfections a real export has (empty cells, text in number columns, a row without a
group label, decimal commas, a byte-order mark) are planted on purpose at fixed rows, so the
reading step has something to report. They are listed in the notes of each dataset.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

SEED = 20240917
DATA = Path(__file__).resolve().parent / "data"


def _num(value: float, places: int, decimal: str = ".") -> str:
    """Format a number with a fixed number of places (and the export's decimal mark)."""
    text = f"{value:.{places}f}"
    if text == f"-{0:.{places}f}":  # avoid "-0.0" from rounding
        text = text[1:]
    return text.replace(".", decimal)


def _write(path: Path, rows: list[list[str]], delimiter: str, newline: str, bom: bool) -> None:
    """Write rows as delimited text, byte for byte the same on every run."""
    text = newline.join(delimiter.join(row) for row in rows) + newline
    data = text.encode("utf-8")
    path.write_bytes((b"\xef\xbb\xbf" if bom else b"") + data)


def growing_trial(rng: np.random.Generator) -> list[list[str]]:
    """Hydroponic trial: five nutrient mixes, one bench each, sown in batches over a season.

    Leaf mass peaks near 23 °C (an inverted U); root length barely depends on temperature;
    days to harvest shortens as it gets warmer. "Standard mix" and "Kelp extract" are built
    to have practically the same root length; "Calcium boost" lost most of its plants, so its
    comparisons are weak.
    """
    mixes = {
        # name: (bench, plants, leaf mass shift g, root length cm, days to harvest)
        "Standard mix": ("B1", 96, 0.0, 22.0, 38.0),
        "Kelp extract": ("B2", 96, 4.0, 22.2, 37.2),
        "High nitrogen": ("B3", 96, 11.0, 19.4, 35.5),
        "Low potassium": ("B4", 80, -9.0, 24.6, 41.0),
        "Calcium boost": ("B5", 26, 2.0, 23.1, 38.8),
    }
    header = [
        "plant_id",
        "bench",
        "mix",
        "temperature (°C)",
        "leaf mass (g)",
        "root length (cm)",
        "days to harvest",
    ]
    rows = []
    plant = 0
    for mix, (bench, n, leaf_shift, root_mean, days_mean) in mixes.items():
        temperature = rng.uniform(15.0, 32.0, n)
        leaf = 92.0 + leaf_shift - 1.0 * (temperature - 23.0) ** 2 + rng.normal(0.0, 7.0, n)
        leaf = np.maximum(leaf, 3.0)
        root = root_mean + 0.08 * (temperature - 23.0) + rng.normal(0.0, 2.4, n)
        days = np.rint(days_mean - 0.35 * (temperature - 23.0) + rng.normal(0.0, 4.5, n))
        for i in range(n):
            plant += 1
            rows.append(
                [
                    f"P{plant:04d}",
                    bench,
                    mix,
                    _num(temperature[i], 1),
                    _num(leaf[i], 1),
                    _num(root[i], 1),
                    str(int(days[i])),
                ]
            )
    # Interleave the benches the way a harvest log would list them: by plant, shuffled.
    order = rng.permutation(len(rows))
    rows = [rows[i] for i in order]
    # Planted imperfections (row numbers below count data rows from 1, header excluded).
    rows[6][4] = ""  # row 7: leaf mass not weighed
    rows[57][5] = ""  # row 58: root length not measured
    rows[120][4] = "n/a"  # row 121: a missing-value word
    rows[203][5] = "12..5"  # row 204: a typing slip
    rows[288][6] = "err"  # row 289: the scale logged an error code
    rows[341][2] = ""  # row 342: mix label lost
    rows[377][6] = ""  # row 378: days not recorded
    return [header, *rows]


def picking_times(rng: np.random.Generator) -> list[list[str]]:
    """Warehouse order picking by shift, exported from a German site's system.

    Pick time is right-skewed (lognormal around a line-count trend); the night shift picks
    bigger store-restock orders, so shifts differ in order mix as well as in speed.
    """
    shifts = {
        # name: (orders, mean extra lines, speed factor)
        "Früh": (820, 2.6, 1.00),
        "Spät": (760, 2.8, 1.06),
        "Nacht": (420, 4.2, 1.13),
    }
    header = ["order_no", "date", "shift", "lines", "items", "pick time [s]", "walk distance [m]"]
    rows = []
    order_no = 500000
    days = np.arange(1, 29)
    for shift, (n, extra_lines, speed) in shifts.items():
        lines = 1 + rng.poisson(extra_lines, n)
        items = lines + rng.poisson(1.5 * lines)
        pick = (28.0 + 16.0 * lines) * speed * rng.lognormal(0.0, 0.38, n)
        walk = (35.0 + 21.0 * lines) * rng.lognormal(0.0, 0.25, n)
        day = rng.choice(days, n)
        for i in range(n):
            order_no += 1
            rows.append(
                [
                    str(order_no),
                    f"{int(day[i]):02d}.03.2024",
                    shift,
                    str(int(lines[i])),
                    str(int(items[i])),
                    _num(pick[i], 1, ","),
                    _num(walk[i], 1, ","),
                ]
            )
    order = rng.permutation(len(rows))
    rows = [rows[i] for i in order]
    rows[14][5] = ""  # row 15: pick time missing (scanner dropped the scan)
    rows[402][5] = "err"  # row 403: error code in a number column
    rows[777][6] = "45,,2"  # row 778: doubled decimal comma
    rows[999][2] = ""  # row 1000: shift label missing
    rows[1500][6] = ""  # row 1501: walk distance missing
    rows[1888][5] = "-"  # row 1889: a dash meaning "no value"
    return [header, *rows]


def germination(rng: np.random.Generator) -> list[list[str]]:
    """Seed-coating test: trays of 50 seeds, coating codes with leading zeros, 00 = uncoated."""
    coatings = {
        # code: (trays, germination probability, seedling height mm)
        "00": (14, 0.78, 31.0),
        "01": (15, 0.86, 32.5),
        "02": (13, 0.80, 36.0),
        "03": (12, 0.70, 30.0),
    }
    header = ["tray", "coating", "substrate moisture (%)", "germinated (%)", "seedling height (mm)"]
    rows = []
    tray = 0
    for code, (n, p, height) in coatings.items():
        moisture = rng.uniform(55.0, 80.0, n)
        germinated = rng.binomial(50, np.clip(p + 0.004 * (moisture - 67.0), 0, 1)) * 2.0
        tall = height + 0.15 * (moisture - 67.0) + rng.normal(0.0, 3.0, n)
        for i in range(n):
            tray += 1
            rows.append(
                [
                    f"T{tray:02d}",
                    code,
                    _num(moisture[i], 1),
                    _num(germinated[i], 0),
                    _num(tall[i], 1),
                ]
            )
    rows[9][4] = ""  # row 10: tray knocked over before the height count
    return [header, *rows]


DEPOTS = {
    # depot: (deliveries per week, mean delay in min at the start, added delay per 30 days)
    "Harbour": (9, 14.0, 1.5),
    "Airport": (9, 9.0, 0.2),
    "Ring road": (8, 18.0, 3.0),
    "Old town": (6, 24.0, -2.0),
}


def depot_deliveries(rng: np.random.Generator) -> list[list]:
    """Parcel depots over one season, as a spreadsheet export: a title line and an empty line
    above the header, dates as real date cells, one depot label typed with a trailing space.

    Delays drift with the season (Ring road worse, Old town better after its new loading bay),
    so the smooths against the date have something to show.
    """
    import datetime as dt

    start = dt.date(2026, 3, 2)
    rows: list[list] = [
        ["Parcel depots – delivery log, spring 2026 (export)"],
        [],
        ["date", "depot", "driver", "delay (min)", "parcels"],
    ]
    for week in range(16):
        for depot, (per_week, delay, drift) in DEPOTS.items():
            for _ in range(per_week):
                day = start + dt.timedelta(days=int(week * 7 + rng.integers(0, 6)))
                days = (day - start).days
                late = max(0.0, rng.gamma(2.0, (delay + drift * days / 30) / 2.0))
                parcels = int(rng.poisson(140 if depot != "Old town" else 90))
                driver = f"D{int(rng.integers(1, 25)):02d}"
                rows.append([day, depot, driver, round(float(late), 1), parcels])
    rows[12][1] = "Harbour "  # typed with a trailing space; the reader trims it
    return rows


def _write_xlsx(path: Path, sheet: str, rows: list[list]) -> None:
    """Write rows as one sheet of an .xlsx, byte for byte the same on every run."""
    import datetime as dt
    import io
    import re
    import zipfile

    import openpyxl

    book = openpyxl.Workbook()
    book.active.title = sheet
    for row in rows:
        book.active.append(row)
    for cell in book.active["A"][3:]:
        cell.number_format = "yyyy-mm-dd"
    fixed = dt.datetime(2026, 6, 30, 12, 0, 0)
    book.properties.created = book.properties.modified = fixed
    buffer = io.BytesIO()
    book.save(buffer)
    # openpyxl stamps each zip entry with the current time: rewrite them with a fixed one.
    out = io.BytesIO()
    with zipfile.ZipFile(buffer) as src, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            entry = zipfile.ZipInfo(info.filename, date_time=fixed.timetuple()[:6])
            entry.compress_type = zipfile.ZIP_DEFLATED
            data = src.read(info.filename)
            if info.filename == "docProps/core.xml":
                # openpyxl sets "modified" to the time of saving whatever it is given.
                data = re.sub(
                    rb"(<dcterms:modified[^>]*>)[^<]*", rb"\g<1>2026-06-30T12:00:00Z", data
                )
            dst.writestr(entry, data)
    path.write_bytes(out.getvalue())


def main() -> None:
    """Write all four data files into example_project/data/."""
    rng = np.random.default_rng(SEED)
    DATA.mkdir(exist_ok=True)
    _write(DATA / "growing_trial.csv", growing_trial(rng), ",", "\n", bom=False)
    # A spreadsheet export from a European locale: semicolons, decimal commas, CRLF, BOM.
    _write(DATA / "picking_times.csv", picking_times(rng), ";", "\r\n", bom=True)
    _write(DATA / "germination.tsv", germination(rng), "\t", "\n", bom=False)
    _write_xlsx(DATA / "depot_deliveries.xlsx", "Deliveries", depot_deliveries(rng))
    for path in sorted(DATA.iterdir()):
        print(f"{path.relative_to(DATA.parent)}: {path.stat().st_size:,} bytes")


if __name__ == "__main__":
    main()
