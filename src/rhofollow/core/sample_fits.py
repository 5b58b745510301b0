"""The FITS form of a sample set: a binary table of :meth:`SampleSet.to_table`, built as bytes.

Every column is written as float64 (``TFORM = 'D'``), so the file holds the table's values bit
for bit (NaN, infinities, negative zero and subnormals included); units go into ``TUNITn``.
The table's meta (``name``, ``ess`` and the set's scalar meta) become ``HIERARCH`` cards, which
keep the key's case and allow keys longer than eight characters (FITS Standard 4.0, section 4.1.2.1
(value from memory): HIERARCH is the ESO convention that astropy writes and reads). A value that a
header card cannot hold exactly — a float whose shortest repr does not fit the card (astropy then
writes 16 or fewer digits), NaN or an infinity, a string with characters outside printable ASCII or
with trailing blanks — is written as its JSON text instead, and its key is listed (as JSON) in the
card ``HIERARCH rhofollow_json``; :func:`decode_fits_meta` turns them back. So
``Table.read(path)`` shows every value, and ``SampleSet.from_table`` of it gives the meta back
exactly. Building the bytes is all this module does; the report layer writes the files.
"""
from __future__ import annotations

import functools
import json
import math
import struct

__all__ = ["table_fits_bytes", "decode_fits_meta", "JSON_KEYS_CARD"]

#: Header card (a HIERARCH key) listing the meta keys whose values are stored as JSON text.
JSON_KEYS_CARD = "rhofollow_json"

# Structural keywords of a binary-table header, and the ones astropy's reader drops or gathers:
# a meta key of these names (any case) would be lost or clash, so it is refused.
_RESERVED = {"SIMPLE", "XTENSION", "BITPIX", "NAXIS", "EXTEND", "PCOUNT", "GCOUNT", "TFIELDS", "THEAP",
             "END", "COMMENT", "HISTORY", "CONTINUE", "HIERARCH", "EXTNAME", "CHECKSUM", "DATASUM"}
_COLUMN_PREFIXES = ("NAXIS", "TTYPE", "TFORM", "TUNIT", "TNULL", "TSCAL", "TZERO", "TDISP", "TDIM", "TBCOL")


def _check_key(key) -> str:
    """The meta key, or ValueError when a HIERARCH card cannot carry it under its own name."""
    if not isinstance(key, str) or not key or not all(" " < ch <= "~" for ch in key) or "=" in key \
            or len(key) > 40:
        raise ValueError(f"sample meta key {key!r} cannot be a FITS header key: use 1 to 40 printable ASCII "
                         "characters without blanks or '='")
    up = key.upper()
    if up in _RESERVED or up == JSON_KEYS_CARD.upper() or up.startswith(_COLUMN_PREFIXES):
        raise ValueError(f"sample meta key {key!r} is a reserved FITS keyword")
    return key


def _same(a, b) -> bool:
    """Whether two header values are the same value of the same type (floats: the same bits)."""
    if type(a) is not type(b):
        return False
    if isinstance(a, float):
        return struct.pack("<d", a) == struct.pack("<d", b)
    return a == b


def _plain(value) -> bool:
    """Whether ``value`` may go into a card as itself (then checked by reading the header back)."""
    if isinstance(value, float):
        return math.isfinite(value)
    if isinstance(value, str):
        return all(" " <= ch <= "~" for ch in value) and value == value.rstrip(" ")
    return isinstance(value, (bool, int))


def _cards(meta: dict):
    """``(cards, encoded)``: the HIERARCH cards of ``meta`` and the keys written as JSON text."""
    from astropy.io import fits

    cards, encoded = [], []
    for key, value in meta.items():
        _check_key(key)
        if isinstance(value, float):
            value = float(value)                  # numpy float64 -> float (same bits)
        card = None
        if _plain(value):
            try:
                card = fits.Card("HIERARCH " + key, value)
                back = fits.Header.fromstring(card.image).cards[0].value
                if not _same(value, back):
                    card = None
            except ValueError:
                card = None
        if card is None:
            card = fits.Card("HIERARCH " + key, json.dumps(value, ensure_ascii=True, allow_nan=True))
            encoded.append(key)
        cards.append(card)
    if encoded:
        cards.append(fits.Card("HIERARCH " + JSON_KEYS_CARD, json.dumps(encoded, ensure_ascii=True)))
    return cards, encoded


@functools.lru_cache(maxsize=8)
def _columns_header(columns: tuple) -> str:
    """The binary-table header (text) that astropy writes for float64 columns ``(name, unit)`` and
    no rows: built once per layout, since astropy's table conversion costs more than the data."""
    import numpy as np
    from astropy.io import fits
    from astropy.table import Table

    plain = Table([np.zeros(0) for _ in columns], names=[c for c, _ in columns])
    for c, unit in columns:
        plain[c].unit = unit
    return fits.table_to_hdu(plain).header.tostring()


def _padded(data: bytes, fill: bytes) -> bytes:
    """``data`` filled up to a whole number of 2880-byte FITS blocks."""
    return data + fill * (-len(data) % 2880)


def table_fits_bytes(table) -> bytes:
    """A FITS file (empty primary HDU, one binary-table extension) of an astropy table, as bytes.

    The bytes are those of astropy's own writer (``fits.table_to_hdu`` and ``HDUList.writeto``;
    a test checks it): the header of the column layout is astropy's (built once per layout), the
    meta cards are astropy cards, and the rows are the columns' big-endian float64 values, row by
    row, as a binary table lays them out (FITS Standard 4.0, section 7.3.3, value from memory).

    Parameters
    ----------
    table : astropy.table.Table
        Float columns (units become ``TUNITn``) and scalar meta (int, float, str, bool), as
        :meth:`rhofollow.core.samples.SampleSet.to_table` makes it.

    Returns
    -------
    bytes
        The file; the same table gives the same bytes.

    Raises
    ------
    ValueError
        A meta key that no header card can carry (not printable ASCII, over 40 characters, or a
        reserved FITS keyword).
    """
    import numpy as np
    from astropy.io import fits

    names = table.colnames
    layout = tuple((c, None if table[c].unit is None else table[c].unit.to_string()) for c in names)
    header = fits.Header.fromstring(_columns_header(layout))
    header["NAXIS2"] = len(table)
    cards, _ = _cards(dict(table.meta))
    for card in cards:
        header.append(card, end=True)
    rows = np.empty((len(table), len(names)), dtype=">f8")
    for i, c in enumerate(names):
        rows[:, i] = np.asarray(table[c], dtype=float)
    primary = fits.PrimaryHDU().header.tostring().encode("ascii")
    return primary + header.tostring().encode("ascii") + _padded(rows.tobytes(), b"\0")


def decode_fits_meta(meta) -> dict:
    """The meta of a table read from :func:`table_fits_bytes`' file, with JSON-coded values decoded.

    A table without the card :data:`JSON_KEYS_CARD` (an ECSV file, say) comes back unchanged.

    Parameters
    ----------
    meta : mapping
        ``Table.read(path).meta``.

    Returns
    -------
    dict
        The meta as it was written (values of the listed keys decoded, the listing card dropped).
    """
    out = dict(meta)
    listing = out.pop(JSON_KEYS_CARD, None)
    if listing is None:
        return out
    for key in json.loads(listing):
        out[key] = json.loads(out[key])
    return out
