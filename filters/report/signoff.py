"""What makes a report one that can be signed: the title block at its head (design,
revision, author, date, tool version) and the sign-off block at its end (prepared by,
reviewed by, approved by, each with name, signature and date lines)."""
from __future__ import annotations

from .. import __version__
from .context import Context
from .document import esc

__all__ = [
    "SIGNERS",
    "title_block",
    "signoff_section",
]

#: The roles of the sign-off block, in the order they sign.
SIGNERS = ("Prepared by", "Reviewed by", "Approved by")

_BLANK = "\u00a0" * 24  # an empty line to write on (kept open in the PDF's table layout)


def title_block(ctx: Context, date: str) -> str:
    """The title block: design name, revision, author, date and tool version, as a table.

    Parameters
    ----------
    ctx : Context
        The report's context (the design names itself, its revision and author).
    date : str
        The date (and time) the report was generated.

    Returns
    -------
    str
        HTML.
    """
    d = ctx.design
    rows = [("Design", d.name or "(unnamed)"), ("Revision", d.revision or "(not stated)"),
            ("Author", d.author or "(not stated)"), ("Date", date), ("Tool", f"tolspread {__version__}")]
    head = "".join(f"<th>{esc(k)}</th>" for k, _ in rows)
    cells = "".join(f'<td class="tb-{esc(k.lower())}">{esc(v)}</td>' for k, v in rows)
    return f'<table class="titleblock"><thead><tr>{head}</tr></thead><tbody><tr>{cells}</tr></tbody></table>'


def signoff_section(ctx: Context) -> str:
    """The sign-off block: one row per role with lines for name, signature and date; the
    author's name is written in as the preparer when the design states one.

    Parameters
    ----------
    ctx : Context
        The report's context.

    Returns
    -------
    str
        HTML.
    """
    author = ctx.design.author
    rows = []
    for role in SIGNERS:
        name = esc(author) if role == "Prepared by" and author else _BLANK
        rows.append(f"<tr><th>{esc(role)}</th><td>{name}</td><td>{_BLANK}</td><td>{_BLANK}</td></tr>")
    return ("<p>By signing, each person states that they have read this report, including its assumptions and "
            "caution, and accept its conclusions for the purpose stated.</p>"
            '<table class="signoff" width="100%"><thead><tr><th width="16%">Role</th><th width="32%">Name</th>'
            '<th width="32%">Signature</th><th width="20%">Date</th></tr></thead><tbody>' + "".join(rows)
            + "</tbody></table>")
