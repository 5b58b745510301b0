"""Terminal rendering shared by every command: one-line messages and tables that fit the width.

Two rules, kept here so no command has to remember them:

* A **message** (error, warning, notice, skipped target, progress note, caution, file written) is
  printed as exactly one line, never wrapped by the renderer, whatever the terminal width or path
  length: the file, row, column and reason stay on the line a user greps. The terminal may fold
  the line visually; no newline is ever inserted.
* A **table** never truncates a target name or a number. Its columns are chosen for the width
  available: when the table does not fit, the least important columns are left out (compact forms
  first, where a column has one) and one line says what was left out and how to see it. Only
  columns marked ``wrap`` (prose such as a reason) may fold inside their cell.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from rich import box
from rich.cells import cell_len
from rich.console import Console
from rich.table import Table
from rich.text import Text

__all__ = ["Col", "FittedTable", "fit_table", "message", "say", "print_table", "table_note"]

#: Style of the word before the colon of each kind of message.
KIND_STYLES = {"error": "bold red", "internal error": "bold red", "warning": "yellow",
               "notice": "yellow", "skipped": "dim", "caution": "bold"}


def _one_line(text) -> str:
    return " ".join(str(text).splitlines())


def message(text, kind: str | None = None, *, to_stdout: bool = False, style: str = "") -> None:
    """Print one message as one line ("kind: text"), literally (no markup), never wrapped.

    Errors, warnings, notices and progress go to stderr; ``to_stdout`` is for lines that belong to the
    result (cautions, table notes, report locations).

    Parameters
    ----------
    text : object
        The message (converted with ``str``; line breaks become spaces).
    kind : str or None
        The word before the colon ("error", "warning", "notice", ...; None: no prefix).
    to_stdout : bool
        Print on stdout instead of stderr.
    style : str
        rich style of the text.
    """
    from rhofollow.cli.common import console, err_console
    from rhofollow.core.timescales import first_on_terminal

    if kind == "notice" and not first_on_terminal(str(text)):
        return   # the offline-tables notice: in every document that needs it, on the terminal once a run
    line = Text()
    if kind:
        line.append(f"{kind}:", style=KIND_STYLES.get(kind, "bold"))
        line.append(" ")
    line.append(_one_line(text), style=style)
    (console() if to_stdout else err_console()).print(line, soft_wrap=True, highlight=False)


def say(text, style: str = "") -> None:
    """One line of result text on stdout (never wrapped).

    Parameters
    ----------
    text : object
        The line (converted with ``str``).
    style : str
        rich style of the text.
    """
    message(text, to_stdout=True, style=style)


@dataclass
class Col:
    """One table column.

    ``drop``: 0 = always shown; a larger number is left out earlier when the table is too wide.
    ``compact``: index of a shorter form of the cells (``cells[i]`` may be a tuple ``(full, compact,
    ...)``) used before the column is dropped; ``compact_header`` names that form.
    ``what``: how the left-out note names the column (default: the header on one line).
    """

    header: str
    justify: str = "right"
    drop: int = 0
    wrap: bool = False
    compact_header: str | None = None
    what: str | None = None
    style: str | None = None
    max_width: int | None = None  # only for ``wrap`` columns: fold beyond this width

    def label(self) -> str:
        """How the left-out note names the column.

        Returns
        -------
        str
            ``what``, or the header on one line.
        """
        return self.what or " ".join(self.header.split())


@dataclass
class FittedTable:
    """The table to print, the columns left out (labels) and the compacted ones."""

    table: Table
    left_out: list[str] = field(default_factory=list)
    compacted: list[str] = field(default_factory=list)
    width: int = 0

    def note(self, how: str = "a wider terminal or --json") -> str | None:
        """One line saying what was left out and how to get it.

        Parameters
        ----------
        how : str
            Where the left-out columns can be seen.

        Returns
        -------
        str or None
            The note (None if nothing was left out or shortened).
        """
        parts = []
        if self.left_out:
            parts.append("left out " + ", ".join(self.left_out))
        if self.compacted:
            parts.append("shortened " + ", ".join(self.compacted))
        if not parts:
            return None
        return f"At {self.width} columns: {'; '.join(parts)} (see {how})."


def _text(cell) -> Text:
    return cell.copy() if isinstance(cell, Text) else Text(str(cell))


def _form(cell, compact: bool):
    if isinstance(cell, tuple):
        return cell[1] if compact and len(cell) > 1 else cell[0]
    return cell


def _lines(t: Text) -> list[str]:
    return t.plain.splitlines() or [""]


def _col_width(header: str, cells: list[Text], wrap: bool) -> int:
    """Width a column needs: its longest line, or its longest word when it may wrap."""
    texts = [Text(header)] + cells
    if wrap:  # (a max_width only lowers what the column takes when there is room; the minimum is a word)
        return max((cell_len(w) for t in texts for w in t.plain.split()), default=1)
    return max(cell_len(line) for t in texts for line in _lines(t))


def _build(title, cols, rows, forms, row_styles, caption) -> Table:
    tab = Table(title=title, title_justify="left", caption=caption, caption_justify="left",
                header_style="bold", box=box.SIMPLE_HEAD, show_edge=False, pad_edge=False,
                padding=(0, 1))
    for c, compact in zip(cols, forms):
        head = c.compact_header if compact and c.compact_header else c.header
        tab.add_column(head, justify=c.justify, no_wrap=not c.wrap, overflow="fold", style=c.style,
                       max_width=c.max_width if c.wrap else None)
    for r, st in zip(rows, row_styles):
        tab.add_row(*r, style=st)
    return tab


def _needed(cols, cells, forms) -> int:
    """Total width of the table with these columns (SIMPLE_HEAD box, no edge, no edge padding)."""
    n = len(cols)
    if n == 0:
        return 0
    widths = []
    for j, (c, compact) in enumerate(zip(cols, forms)):
        head = c.compact_header if compact and c.compact_header else c.header
        widths.append(_col_width(head, [_text(_form(row[j], compact)) for row in cells], c.wrap))
    # each column: 1 padding either side except at the edges; 1 separator between columns
    return sum(widths) + 2 * n - 2 + (n - 1)


def fit_table(title: str | None, cols: list[Col], rows: list[list], width: int, *,
              row_styles: list | None = None, caption: str | None = None) -> FittedTable:
    """Choose the columns of a table for ``width`` terminal columns (see the module docstring).

    Columns with ``drop == 0`` are always kept; if even they do not fit, every column may fold
    (nothing is cut, a long name breaks across lines).

    Parameters
    ----------
    title : str or None
        The table's title.
    cols : list of Col
        The columns, in display order.
    rows : list of list
        One cell per column: a str, a rich Text, or a tuple (full, compact) for a column with a
        compact form.
    width : int
        Terminal width, in character cells.
    row_styles : list or None
        rich style per row.
    caption : str or None
        Text under the table.

    Returns
    -------
    FittedTable
        The table and the columns left out or shortened.
    """
    row_styles = list(row_styles) if row_styles is not None else [None] * len(rows)
    keep = list(range(len(cols)))
    compact = [False] * len(cols)
    left_out, shortened = [], []

    def needed():
        return _needed([cols[i] for i in keep], [[r[i] for i in keep] for r in rows],
                       [compact[i] for i in keep])

    # candidates in order: compact forms (by drop rank, highest first), then dropping
    steps = []
    for i in sorted(range(len(cols)), key=lambda i: -cols[i].drop):
        if cols[i].compact_header is not None or any(isinstance(r[i], tuple) for r in rows):
            steps.append(("compact", i))
    for i in sorted((i for i in range(len(cols)) if cols[i].drop > 0), key=lambda i: -cols[i].drop):
        steps.append(("drop", i))
    for action, i in steps:
        if needed() <= width:
            break
        if action == "compact" and i in keep:
            compact[i] = True
            shortened.append(cols[i].label())
        elif action == "drop":
            keep.remove(i)
            left_out.append(cols[i].label())
            if cols[i].label() in shortened:
                shortened.remove(cols[i].label())
    kcols = [cols[i] for i in keep]
    kforms = [compact[i] for i in keep]
    krows = [[_text(_form(r[i], compact[i])) for i in keep] for r in rows]
    if needed() > width:  # too narrow even for the essentials: fold everything, cut nothing
        kcols = [Col(c.header, c.justify, c.drop, True, c.compact_header, c.what, c.style, c.max_width)
                 for c in kcols]
    tab = _build(title, kcols, krows, kforms, row_styles, caption)
    return FittedTable(tab, left_out, shortened, width)


def table_note(fitted: FittedTable, how: str = "a wider terminal or --json") -> None:
    """Print the one-line note of what a fitted table left out (nothing when it left nothing out).

    Parameters
    ----------
    fitted : FittedTable
        The fitted table.
    how : str
        Where the left-out columns can be seen.
    """
    note = fitted.note(how)
    if note:
        say(note, style="dim")


def print_table(con: Console, title, cols, rows, *, row_styles=None, caption=None,
                how: str = "a wider terminal or --json") -> FittedTable:
    """Fit a table to ``con``'s width, print it and the one-line note of what was left out.

    Parameters
    ----------
    con : rich.console.Console
        Where to print.
    title, cols, rows, row_styles, caption
        As for :func:`fit_table`.
    how : str
        Where the left-out columns can be seen.

    Returns
    -------
    FittedTable
        The printed table.
    """
    fitted = fit_table(title, cols, rows, con.width, row_styles=row_styles, caption=caption)
    con.print(fitted.table)
    table_note(fitted, how)
    return fitted
