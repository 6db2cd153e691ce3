"""A part's own menu in the parts panel (right-click on its name): constraints, measurements
and networks (the entries of :mod:`app.qt_network_menu`).

* **Lock grade**: a grade search keeps the part's grade (``locked`` in the design file);
* **Forbid**: technologies a grade search must not give the part (``forbid``): each
  technology of the catalog's grades of its kind, and "class II" for capacitors;
* **Measured values from CSV…**: the part's distribution becomes its measured values
  (:func:`filters.measured.read_measured_csv`); **Clear measured values** gives the grade's back.

Each is one undoable edit through the window's ``apply_edit`` (the loader's rules). A bad CSV
changes nothing: a message names the file and the line. The panel shows a measured part's
count of values and lots instead of its tolerance slider, with the lot-to-lot caution.
"""
from __future__ import annotations

from PySide6.QtWidgets import QFileDialog, QLabel, QMenu

from ..errors import InputError
from ..measured import Measured, read_measured_csv
from .qt_network_menu import add_network_entries, install_network_menus

LOT_CAUTION = ("one reel says nothing about lot-to-lot variation: other lots may sit elsewhere within the "
               "grade's tolerance; measure several lots before a decision that spans them")


def forbid_words(design, kind: str) -> list[str]:
    """The technology words offered for a part of ``kind``: the first word of each technology
    of the catalog's grades of that kind (exact parts left out), "class II" for capacitors, and
    whatever the part's list already holds."""
    words: list[str] = []
    for g in design.catalog.for_kind(kind):
        if g.tolerance_pct > 0 and g.technology:
            w = g.technology.split()[0]
            if w not in words:
                words.append(w)
    if kind == "C":
        words.append("class II")
    return words


def show_constraints(label: QLabel, part) -> None:
    """The part's name in the panel: "(locked)" after it, the forbidden words in its tooltip."""
    label.setText(f"{part.ref} (locked)" if part.locked else part.ref)
    tips = ["grade locked: a grade search keeps it"] if part.locked else []
    if part.forbid:
        tips.append(f"forbidden: {', '.join(part.forbid)}")
    tips.append("right-click: lock grade, forbid technologies, measured values, networks; "
                "click: choose it for a network (Ctrl+click: several)")
    label.setToolTip("; ".join(tips))


def measured_text(m: Measured) -> str:
    """``40 measured, 1 lot``."""
    lots = m.lot_count
    return f"{len(m.values):,} measured, {lots} lot{'s' if lots != 1 else ''}"


def show_measured(readout: QLabel, m: Measured) -> None:
    """A measured part's readout (in place of its tolerance), the lot caution as its tooltip."""
    readout.setText(measured_text(m) + (" ⚠" if m.lot_count < 2 else ""))
    readout.setToolTip(f"{len(m.values):,} measured values from {m.source or 'a file'}, resampled for each board; "
                       f"{LOT_CAUTION}. Right-click the part's name to clear them.")


def part_menu(w, ref: str) -> QMenu:
    """The menu of part ``ref`` (its actions named ``part_lock``, ``part_forbid:<word>``,
    ``part_measured_csv``, ``part_measured_clear``)."""
    d = w.session.design
    p = d.parts[d.part_index(ref)]
    menu = QMenu(w)
    menu.setObjectName("part_menu")
    lock = menu.addAction("Lock grade")
    lock.setObjectName("part_lock")
    lock.setCheckable(True)
    lock.setChecked(p.locked)
    lock.triggered.connect(lambda on: set_locked(w, ref, bool(on)))
    forbid = menu.addMenu("Forbid for this part")
    forbid.setObjectName("part_forbid_menu")
    for word in forbid_words(d, p.kind) + [x for x in p.forbid if x not in forbid_words(d, p.kind)]:
        a = forbid.addAction(word)
        a.setObjectName(f"part_forbid:{word}")
        a.setCheckable(True)
        a.setChecked(word in p.forbid)
        a.triggered.connect(lambda on, word=word: set_forbidden(w, ref, word, bool(on)))
    menu.addSeparator()
    csv = menu.addAction("Measured values from CSV…")
    csv.setObjectName("part_measured_csv")
    csv.triggered.connect(lambda *_c: import_measured(w, ref))
    clear = menu.addAction("Clear measured values")
    clear.setObjectName("part_measured_clear")
    clear.setEnabled(p.measured is not None)
    clear.triggered.connect(lambda *_c: clear_measured(w, ref))
    add_network_entries(menu, w, ref)  # networks and matched pairs (app/qt_network_menu.py)
    return menu


def show_part_menu(w, ref: str, where) -> None:
    """Pop up part ``ref``'s menu at global point ``where`` (kept as ``w.part_menu``)."""
    w.part_menu = part_menu(w, ref)
    w.part_menu.popup(where)


def install_part_menu(w) -> None:
    """Right-clicks on a part's name in the parts panel open its menu."""
    w.parts.part_menu_requested.connect(lambda ref, where: show_part_menu(w, ref, where))
    install_network_menus(w)


def _edit(w, ref: str, text: str, **changes) -> str | None:
    d = w.session.design
    reason = w.apply_edit(d.with_part(ref, **changes), text)
    if reason is not None:
        w.show_problem(f"{ref} was not changed", reason)
    return reason


def set_locked(w, ref: str, on: bool) -> None:
    _edit(w, ref, f"{ref} grade {'locked' if on else 'unlocked'}", locked=on)


def set_forbidden(w, ref: str, word: str, on: bool) -> None:
    p = w.session.design.parts[w.session.design.part_index(ref)]
    words = tuple(x for x in p.forbid if x != word) + ((word,) if on else ())
    _edit(w, ref, f"{ref} {'forbid' if on else 'allow'} {word}", forbid=words)


def import_measured(w, ref: str) -> None:
    """Ask for a CSV, read it, and make it part ``ref``'s distribution (one edit); a bad file
    gives a message naming it and the line, and nothing changes."""
    path, _ = QFileDialog.getOpenFileName(w, f"Measured values of {ref}", "", "CSV files (*.csv);;All files (*)")
    if not path:
        return
    try:
        m = read_measured_csv(path)
    except InputError as exc:
        w.show_problem(f"Measured values of {ref} not read", str(exc))
        return
    if _edit(w, ref, f"{ref} measured values ({len(m.values):,})", measured=m) is None:
        caution = f"; caution: {LOT_CAUTION}" if m.lot_count < 2 else ""
        w.show_status(f"{ref}: {measured_text(m)} values from {m.source}{caution}")


def clear_measured(w, ref: str) -> None:
    if _edit(w, ref, f"{ref} measured values cleared", measured=None) is None:
        w.show_status(f"{ref}: the grade's distribution again")
