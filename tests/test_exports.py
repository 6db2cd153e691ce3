"""Files the program writes for people and other programs: the parts-list CSV, the report
(HTML and PDF), the plots as SVG. Each is read back with tools outside the project: the
csv module, html.parser, xml.etree, pdftotext and pdftoppm (poppler), headless chromium and
ImageMagick where installed.
"""
from __future__ import annotations

import csv
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from tolspread.designfile import load_demo
from tolspread.recommend import PARTS_COLUMNS, parts_list_rows, smallest_series, write_parts_csv
from tolspread.values import parse_value

# IEC 60063 series as printed in the standard (from memory): the E3..E24 mantissas.
E3 = (1.0, 2.2, 4.7)
E6 = (1.0, 1.5, 2.2, 3.3, 4.7, 6.8)
E12 = (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)
E24 = (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6,
       6.2, 6.8, 7.5, 8.2, 9.1)


def read_csv(path: Path) -> list[dict[str, str]]:
    with open(path, newline="", encoding="utf-8-sig") as fh:
        return list(csv.DictReader(fh))


# --- parts list ---------------------------------------------------------------------------

@pytest.mark.parametrize("text, want", [
    ("4n7", "E3"), ("47n", "E3"), ("22n", "E3"), ("15n", "E6"), ("68k", "E6"), ("3k9", "E12"),
    ("820", "E12"), ("9k1", "E24"), ("2u0", "E24"),
    # E48 and E96 (from memory): E48 has 7.15 and 2.61, 2.74; E96 adds 2.67, 2.80, 1.02
    ("7k15", "E48"), ("2k67", "E96"), ("2k8", "E96"), ("10k2", "E96"),
    # E192 (from memory): 2.64 lies between E96's 2.61 and 2.67; 2.65 is in no series
    ("2k64", "E192"), ("2k65", None),
])
def test_smallest_series_holding_a_value(text, want):
    assert smallest_series(parse_value(text)) == want


def test_smallest_series_of_every_e24_value_in_three_decades():
    for mant in E24:
        want = next(name for name, table in (("E3", E3), ("E6", E6), ("E12", E12), ("E24", E24))
                    if mant in table)
        for scale in (1e-9, 1e3, 1e5):
            assert smallest_series(mant * scale) == want, (mant, scale)


def test_parts_csv_series_bom_formulas_and_plain_metric(tmp_path):
    design = load_demo()
    # a user-made grade whose technology text would run as a spreadsheet formula
    from dataclasses import replace

    from tolspread.grades import Grade

    bad = Grade.from_dict({"name": "R-odd", "kind": "R", "tolerance_pct": 1, "cost": 1,
                           "technology": "=HYPERLINK(\"http://x\")"}, "grades[0]")
    design = replace(design, grades=(bad,)).with_part("R1", grade="R-odd")
    from tolspread.analysis import analyze
    from tolspread.recommend import worst_margin_metric

    result = analyze(design, samples=300)
    rows = parts_list_rows(design, None, result.budget, metric=worst_margin_metric(result.ensemble))
    path = tmp_path / "parts.csv"
    write_parts_csv(rows, path)
    raw = path.read_bytes()
    assert raw.startswith(b"\xef\xbb\xbf")  # UTF-8 byte-order mark (Unicode standard, from memory)
    back = read_csv(path)
    assert list(back[0]) == list(PARTS_COLUMNS)
    by_ref = {r["ref"]: r for r in back}
    # demo values: C4 4.7 nF and C3 47 nF are E3 values, C2 15 nF E6 (IEC 60063, from memory)
    assert (by_ref["C4"]["series"], by_ref["C3"]["series"], by_ref["C2"]["series"]) == ("E3", "E3", "E6")
    assert by_ref["R1"]["series"] == "E96" and by_ref["R1"]["nearest preferred value"] == ""
    assert not any("is preferred" in v for r in back for v in r.values())
    assert by_ref["R1"]["nominal value"] == "2.67 k\u03a9"  # the ohm sign survives the round trip
    assert by_ref["R1"]["technology"] == "'=HYPERLINK(\"http://x\")"  # shown as text, never run
    metric = by_ref["R1"]["budget metric"]
    assert metric and not metric.startswith("margin.") and "_" not in metric
    assert all(r["share of spread budget (%)"] != "" for r in back)


# --- README names the system libraries the window needs (issue 10 #27) -------------------------

def _debian_package(soname: str) -> str:
    """Debian's package name of a shared library (Debian policy 8.1, from memory): the
    library name, then the soname version, with a dash when the name ends in a digit;
    libxcb-cursor.so.0 -> libxcb-cursor0, libxkbcommon-x11.so.0 -> libxkbcommon-x11-0."""
    name, _, version = soname.partition(".so.")
    version = version.split(".")[0]
    name = name.lower()
    return f"{name}-{version}" if name[-1].isdigit() else f"{name}{version}"


def test_readme_names_every_xcb_library_qt_links():
    pyside = pytest.importorskip("PySide6")
    if not shutil.which("ldd"):
        pytest.skip("ldd not available")
    plugin = Path(pyside.__file__).parent / "Qt" / "plugins" / "platforms" / "libqxcb.so"
    if not plugin.exists():
        pytest.skip("this PySide6 has no xcb plugin")
    libs = Path(pyside.__file__).parent / "Qt" / "lib"
    out = subprocess.run(["ldd", str(plugin), str(libs / "libQt6XcbQpa.so.6"), str(libs / "libQt6Gui.so.6")],
                         capture_output=True, text=True).stdout
    sonames = {line.split()[0] for line in out.splitlines() if "=>" in line}
    wanted = {_debian_package(s) for s in sonames
              if s.startswith(("libxcb-", "libxkbcommon-x11", "libEGL", "libGL.", "libfontconfig", "libdbus"))}
    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text(encoding="utf-8")
    block = readme[readme.index("apt-get install"):]
    block = block[:block.index("```")]
    listed = set(block.replace("\\", " ").split())
    assert wanted and wanted <= listed, sorted(wanted - listed)


# --- the command line's files: report agrees with the terminal, files get the user's mode ----------

def _tolspread() -> list[str]:
    beside = Path(sys.executable).with_name("tolspread")
    return [str(beside)] if beside.exists() else [shutil.which("tolspread") or "tolspread"]


def test_recommend_report_agrees_with_the_terminal_and_files_are_not_private(tmp_path):
    # issue 10 #15 (current grades, both costs, no unlabelled column) and #25 (file modes)
    import html as html_mod
    import re

    csv_path, rep_path, json_path, rep2 = (tmp_path / n for n in ("p.csv", "r.html", "a.json", "a.html"))
    umask = lambda: os.umask(0o022)  # noqa: E731 - the common default (from memory)
    run = subprocess.run(_tolspread() + ["recommend", "--target-yield", "0.9", "--samples", "400",
                                         "--csv", str(csv_path), "--report", str(rep_path)],
                         capture_output=True, text=True, timeout=600, preexec_fn=umask, cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    subprocess.run(_tolspread() + ["analyze", "--samples", "300", "--json", str(json_path), "--report", str(rep2)],
                   capture_output=True, text=True, timeout=600, preexec_fn=umask, cwd=tmp_path, check=True)
    for p in (csv_path, rep_path, json_path, rep2):  # the mode the umask gives, as PNG and PDF get
        assert (p.stat().st_mode & 0o777) == 0o644, (p.name, oct(p.stat().st_mode))
    m = re.search(r"total relative cost ([\d.]+) \(current grades ([\d.]+)\)", run.stdout)
    assert m, run.stdout
    doc = rep_path.read_text(encoding="utf-8")
    text = html_mod.unescape(re.sub(r"<[^>]+>", "", doc))
    assert f"recommended grades {m.group(1)}, current grades {m.group(2)}" in text
    rows = re.findall(r"<tr><td>(R\d|C\d)</td><td>([^<]+)</td>", doc[doc.index('id="recommendation"'):])
    design = load_demo()
    assert [g for _, g in rows[:len(design.parts)]] == [p.grade for p in design.parts]
    assert "<th></th>" not in doc
