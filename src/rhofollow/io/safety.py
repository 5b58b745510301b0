"""Safe forms of user-supplied text in output files: CSV cells, file names and Markdown.

CSV cells
    A spreadsheet evaluates a cell that starts with ``=``, ``+``, ``-`` or ``@`` (and some also
    after a leading tab or carriage return) as a formula, so a target name such as
    ``=HYPERLINK(...)`` would run when a collaborator opens the table. Every CSV the tool writes
    goes through :func:`csv_text`, which prefixes such text cells with a single quote (the
    common CSV-injection guidance, common practice, no source). Numbers stay numbers: a float or
    int cell, and a text cell that is a plain decimal number such as ``-3.2``, are written as
    they are. A text cell that already starts with a quote gets one more, so that
    :func:`csv_unquote` undoes the quoting exactly (the ledger's export/import round trip).

File names
    :func:`file_stem` turns a target name into a bounded, unique file-name stem: a readable slug
    plus the first 8 hex digits of the SHA-256 of the exact name, so ``a/b``, ``a-b`` and
    ``a?b`` give three different files and a 300-character name still fits in 255 bytes.

Tables
    :func:`text_table` renders one table as Markdown, a LaTeX ``tabular`` or CSV with the escaping
    of each format (:func:`md_text`, :func:`latex_text`, :func:`csv_text`); every table a proposal
    takes (the RV request, the hours per instrument) goes through it.
"""
from __future__ import annotations

import csv
import hashlib
import io
import math
import re

__all__ = ["FORMULA_TRIGGERS", "csv_cell", "csv_unquote", "csv_text", "file_stem", "MAX_STEM_BYTES", "md_text",
           "latex_text", "text_table", "TABLE_FORMATS"]

#: First characters that make a spreadsheet treat a cell as a formula (plus tab and CR).
FORMULA_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")
_QUOTE = "'"
_PLAIN_NUMBER = re.compile(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?")

#: Longest stem :func:`file_stem` returns, in UTF-8 bytes (slug + "-" + 8 hex digits); leaves
#: room for a suffix such as ``_ecc_omega.png`` well inside the usual 255-byte name limit.
MAX_STEM_BYTES = 80
_SLUG_BYTES = MAX_STEM_BYTES - 9


def csv_cell(value):
    """The value as it goes into a CSV cell: text that a spreadsheet would run is quoted.

    None becomes an empty cell, a non-finite float an empty cell, other numbers are unchanged.

    Parameters
    ----------
    value : object
        The cell's value (number, text, None).

    Returns
    -------
    str, int, float or bool
        The value to hand to :mod:`csv` (numbers unchanged, in their own units).
    """
    if value is None:
        return ""
    if isinstance(value, bool):
        return value
    if isinstance(value, (int, float)):
        return "" if isinstance(value, float) and not math.isfinite(value) else value
    s = str(value)
    if not s:
        return s
    if s[0] == _QUOTE:
        return _QUOTE + s
    if s[0] in FORMULA_TRIGGERS and not _PLAIN_NUMBER.fullmatch(s):
        return _QUOTE + s
    return s


def csv_unquote(text: str) -> str:
    """Undo :func:`csv_cell` on a cell read back (one leading quote before a trigger or a quote).

    Parameters
    ----------
    text : str
        A cell as read from a CSV file.

    Returns
    -------
    str
        The original text.
    """
    if len(text) >= 2 and text[0] == _QUOTE and (text[1] in FORMULA_TRIGGERS or text[1] == _QUOTE):
        return text[1:]
    return text


def csv_text(header: list[str], rows) -> str:
    """CSV text (``\\n`` line ends) of ``header`` and ``rows``, every cell passed through :func:`csv_cell`.

    Parameters
    ----------
    header : list of str
        The column names.
    rows : iterable of iterable
        The rows, each an iterable of cells.

    Returns
    -------
    str
        The whole CSV text.
    """
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    # the csv module leaves a bare CR unquoted with "\n" line ends; such a (hostile) row is
    # written with every text cell quoted so that readers keep it in one cell
    wq = csv.writer(buf, lineterminator="\n", quoting=csv.QUOTE_NONNUMERIC)
    for r in ([header], rows):
        for row in r:
            cells = [csv_cell(v) for v in row]
            (wq if any(isinstance(c, str) and "\r" in c for c in cells) else w).writerow(cells)
    return buf.getvalue()


def file_stem(name: str) -> str:
    """A file-name stem for a target name: readable slug, then ``-`` and 8 hex digits of SHA-256.

    The slug keeps letters, digits, ``-``, ``_`` and ``.`` (other characters become ``-``; a
    leading ``.`` too, so no hidden or ``..`` names) and is cut to fit :data:`MAX_STEM_BYTES`.
    The hash is of the exact UTF-8 name, so different names give different stems (up to a
    2^-32 chance per pair).

    Parameters
    ----------
    name : str
        The target name, exactly as in the catalogue.

    Returns
    -------
    str
        ASCII stem of at most :data:`MAX_STEM_BYTES` bytes.
    """
    digest = hashlib.sha256(name.encode("utf-8", "surrogatepass")).hexdigest()[:8]
    slug = "".join(c if (c.isascii() and c.isalnum()) or c in "-_." else "-" for c in name)
    slug = re.sub(r"-{2,}", "-", slug).lstrip(".")
    slug = slug.encode("ascii")[:_SLUG_BYTES].decode("ascii").strip("-") or "target"
    return f"{slug}-{digest}"


_MD_SPECIAL = re.compile(r"([\\`*_\[\]{}#|!~])")


def md_text(text) -> str:
    """Text safe inside Markdown (a table cell, a list item or a heading).

    HTML is escaped (``<script>`` in a target name shows as text in an HTML-capable viewer),
    Markdown punctuation is backslash-escaped (``|`` no longer splits a table row, ``*``/``_``
    no longer format), and line breaks become spaces.

    Parameters
    ----------
    text : object
        The text (converted with ``str``).

    Returns
    -------
    str
        One line of escaped text.
    """
    import html

    s = html.escape(str(text), quote=False)
    s = re.sub(r"[\r\n\t\v\f]+", " ", s)
    return _MD_SPECIAL.sub(r"\\\1", s)


_LATEX_SPECIAL = {"\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#", "_": r"\_",
                  "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}"}


def latex_text(text) -> str:
    """Text safe inside a LaTeX tabular cell: the ten special characters escaped, line breaks as spaces.

    Parameters
    ----------
    text : object
        The text (converted with ``str``).

    Returns
    -------
    str
        One line of LaTeX text that typesets as the original characters.
    """
    s = re.sub(r"[\r\n\t\v\f]+", " ", str(text))
    return "".join(_LATEX_SPECIAL.get(ch, ch) for ch in s)


#: Table formats of :func:`text_table` and the file suffix of each.
TABLE_FORMATS = {"md": "md", "latex": "tex", "csv": "csv"}


def text_table(header: list[str], rows: list[list], fmt: str, total: list | None = None) -> str:
    """One table as Markdown, a LaTeX ``tabular`` environment or CSV, every cell escaped for the format.

    The first column is left-aligned and the others right-aligned (Markdown, LaTeX); a total row,
    when given, comes last (between rules in LaTeX).

    Parameters
    ----------
    header : list of str
        The column names.
    rows : list of list
        The body rows, text cells (numbers already formatted) or numbers.
    fmt : {"md", "latex", "csv"}
        The format.
    total : list, optional
        The total row.

    Returns
    -------
    str
        The table text, ending with a newline.

    Raises
    ------
    ValueError
        For an unknown format.
    """
    if fmt not in TABLE_FORMATS:
        raise ValueError(f"unknown table format {fmt!r}; choose one of {', '.join(TABLE_FORMATS)}")
    body = list(rows) + ([list(total)] if total is not None else [])
    if fmt == "csv":
        return csv_text(header, body)
    if fmt == "md":
        lines = ["| " + " | ".join(md_text(h) for h in header) + " |",
                 "|" + "|".join(["---"] + ["---:"] * (len(header) - 1)) + "|"]
        lines += ["| " + " | ".join(md_text(c) for c in r) + " |" for r in body]
        return "\n".join(lines) + "\n"
    lines = [r"\begin{tabular}{l" + "r" * (len(header) - 1) + "}", r"\hline",
             " & ".join(latex_text(h) for h in header) + r" \\", r"\hline"]
    lines += [" & ".join(latex_text(c) for c in r) + r" \\" for r in rows]
    if total is not None:
        lines += [r"\hline", " & ".join(latex_text(c) for c in total) + r" \\"]
    lines += [r"\hline", r"\end{tabular}"]
    return "\n".join(lines) + "\n"
