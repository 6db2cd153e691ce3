"""Networks and matched pairs in the parts panel's menus.

A part's own menu (right-click on its name, :mod:`app.qt_part_menu`) gets:

* **New network or matched pair…** (a part in no network): the network dialog
  (:mod:`app.qt_network_dialog`) with this part and the parts chosen in the panel ticked
  (click a part's name to choose it, Ctrl+click to choose several);
* **Add to network** ▸ each network (a part in no network): a part of another kind than the
  members is refused with a message naming it;
* **Take <ref> out of <net>**, **Edit network <net>…**, **Dissolve network <net>** (a member).

A network's heading in the panel has its own menu (right-click): edit, dissolve, and add
the chosen parts. Design > New network or matched pair… makes one from the chosen parts.
Every change is one undoable edit through the window's ``apply_edit`` (the loader's rules),
saved in the design file; the figures are computed again.
"""
from __future__ import annotations

from PySide6.QtWidgets import QMenu

from ..errors import InputError
from . import qt_network_edits as edits


def add_network_entries(menu: QMenu, w, ref: str) -> None:
    """Part ``ref``'s network entries at the end of its menu (actions named
    ``network_new``, ``network_add:<name>``, ``network_take_out``, ``network_edit``,
    ``network_dissolve``)."""
    d = w.session.design
    p = d.parts[d.part_index(ref)]
    if p.kind == "opamp":
        return
    menu.addSeparator()
    net = edits.network_of(d, ref)
    if net is None:
        new = menu.addAction("New network or matched pair…")
        new.setObjectName("network_new")
        new.triggered.connect(lambda *_c: new_network(w, [ref]))
        add = menu.addMenu("Add to network")
        add.setObjectName("network_add_menu")
        add.setEnabled(bool(d.networks))
        for n in d.networks:
            a = add.addAction(f"{n.name} ({', '.join(n.members)})")
            a.setObjectName(f"network_add:{n.name}")
            a.triggered.connect(lambda *_c, name=n.name: add_member(w, name, ref))
        return
    out = menu.addAction(f"Take {ref} out of {net.name}")
    out.setObjectName("network_take_out")
    out.triggered.connect(lambda *_c: take_out(w, net.name, ref))
    _network_entries(menu, w, net.name)


def _network_entries(menu: QMenu, w, name: str) -> None:
    edit = menu.addAction(f"Edit network {name}…")
    edit.setObjectName("network_edit")
    edit.triggered.connect(lambda *_c: edit_network(w, name))
    gone = menu.addAction(f"Dissolve network {name}")
    gone.setObjectName("network_dissolve")
    gone.triggered.connect(lambda *_c: dissolve(w, name))


def network_menu(w, name: str) -> QMenu:
    """The menu of network ``name``'s heading: add the chosen parts, edit, dissolve."""
    menu = QMenu(w)
    menu.setObjectName("network_menu")
    chosen = [r for r in w.parts.chosen if edits.network_of(w.session.design, r) is None]
    add = menu.addAction(f"Add chosen parts ({', '.join(chosen) or 'none chosen'})")
    add.setObjectName("network_add_chosen")
    add.setEnabled(bool(chosen))
    add.triggered.connect(lambda *_c: add_members(w, name, chosen))
    _network_entries(menu, w, name)
    return menu


def install_network_menus(w) -> None:
    """Right-clicks on a network's heading in the parts panel open its menu (kept as ``w.network_menu``)."""
    def show(name: str, where) -> None:
        w.network_menu = network_menu(w, name)
        w.network_menu.popup(where)
    w.parts.network_menu_requested.connect(show)
    w.parts.chosen_changed.connect(lambda refs: refs and w.show_status(
        f"chosen: {', '.join(refs)} (Ctrl+click another to add it); right-click one of them or use "
        "Design > New network or matched pair… to put them in one package"))


def _apply(w, change, text: str, title: str) -> str | None:
    """Apply ``change()`` (a changed design) as one edit named ``text``; a refusal (a rule of
    the edit or of the loader) is shown in a message titled ``title``."""
    try:
        reason = w.apply_edit(change(), text)
    except InputError as exc:
        reason = exc.reason
    if reason is not None:
        w.show_problem(title, reason)
    return reason


def new_network(w, refs: list[str] | None = None) -> None:
    """The network dialog for a new network of ``refs`` and the parts chosen in the panel;
    OK applies it as one edit."""
    from .qt_network_dialog import NetworkDialog

    d = w.session.design
    if not edits.candidates(d):
        w.show_problem("No part to put in a network", "every resistor, capacitor and inductor is in a network "
                       "already: take parts out of one, or dissolve it, first")
        return
    chosen = list(dict.fromkeys([*(refs or []), *w.parts.chosen]))
    dlg = NetworkDialog(d, None, chosen, w)
    w.network_dialog = dlg
    if dlg.exec() and dlg.design is not None:
        if _apply(w, lambda: dlg.design, dlg.text, "The network was not made") is None:
            w.parts.choose([])
            w.show_status(f"{dlg.text}: its members now share its errors")


def edit_network(w, name: str) -> None:
    """The network dialog for network ``name``; OK applies the change as one edit."""
    from .qt_network_dialog import NetworkDialog

    d = w.session.design
    net = next(n for n in d.networks if n.name == name)
    dlg = NetworkDialog(d, net, None, w)
    w.network_dialog = dlg
    if dlg.exec() and dlg.design is not None:
        _apply(w, lambda: dlg.design, dlg.text, f"Network {name} was not changed")


def add_member(w, name: str, ref: str) -> None:
    add_members(w, name, [ref])


def add_members(w, name: str, refs: list[str]) -> None:
    def change():
        d = w.session.design
        for ref in refs:
            d = edits.with_member(d, name, ref)
        return d
    if _apply(w, change, f"add {', '.join(refs)} to {name}", f"Not added to {name}") is None:
        w.parts.choose([])


def take_out(w, name: str, ref: str) -> None:
    _apply(w, lambda: edits.without_member(w.session.design, name, ref), f"take {ref} out of {name}",
           f"{ref} stays in {name}")


def dissolve(w, name: str) -> None:
    _apply(w, lambda: edits.dissolved(w.session.design, name), f"dissolve network {name}",
           f"Network {name} stays")
