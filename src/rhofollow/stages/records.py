"""The output contract every command shares: one JSON envelope, one meaning of failure, one exit status.

Every command's JSON (``--json PATH``, and ``results.json`` / ``night.json`` / ``campaign.json`` of a
report folder) is built here by :func:`envelope`::

    {"command", "catalogue", "seed",
     "n_rows", "n_rows_failed", "n_row_errors", "row_errors": [{"file", "row", "column", "reason", "name"}],
     "n_row_warnings", "row_warnings": [...same keys...],
     "n_targets", "n_ok", "n_targets_failed", "targets": [{"name", "ok", "errors", "warnings", ...}],
     "n_skipped", "skipped": [{"name", "reason"}],
     "caution", "exit_status", ...the command's own keys...}

Meaning of the lists (the same for every command):

* ``row_errors`` -- catalogue rows (or columns, ``row`` 0) the reader rejected; a rejected row never
  becomes a target. ``row_warnings`` -- problems that kept the row.
* ``targets`` -- one record per valid catalogue row the command worked on. A target **failed**
  (``ok`` false) exactly when a stage could not compute its result; ``errors`` then says why and is
  never empty. ``ok`` true means ``errors`` is empty.
* ``skipped`` -- things a command left out of its output although nothing failed (for the planners:
  an occultation window or RV visit that is not observable or not worth its time), one entry per
  item with its reason. Failed targets are not repeated here.

Every count equals the length of the list it counts (``n_ok + n_targets_failed == n_targets``);
``n_rows_failed`` is the number of distinct data rows in ``row_errors`` (a row can fail on several
columns, each its own entry), so ``n_rows - n_rows_failed == n_targets`` for a command that works on
every valid row.

Exit status (:func:`exit_status`): 0 every row valid and every target ok; 1 some rows or targets
failed (the output is written all the same, nothing good is lost); 2 unusable input -- a file
missing or unreadable, a bad site or instrument file, bad options (the CLI's ``UserError`` and
argparse's own errors); 3 an internal error (a bug: please report it with ``--debug``).

Kept free of rhofollow imports so every module can use it.
"""
from __future__ import annotations

__all__ = ["CAUTION", "ENVELOPE_KEYS", "EXIT_OK", "EXIT_FAILED", "EXIT_UNUSABLE", "EXIT_INTERNAL",
           "envelope", "exit_status", "issue_dict", "target_record", "merge_stage_records"]

#: The caution every output carries (plans and predictions touch real instruments).
CAUTION = ("Plans and predictions are advisory: observatory safety limits (Sun avoidance, weather and "
           "wind limits, dome rules) and the site's operations rules override any window, visit or "
           "schedule this tool gives.")

EXIT_OK = 0
EXIT_FAILED = 1
EXIT_UNUSABLE = 2
EXIT_INTERNAL = 3

#: The keys every command's JSON starts with, in this order.
ENVELOPE_KEYS = ("command", "catalogue", "seed", "n_rows", "n_rows_failed", "n_row_errors", "row_errors", "n_row_warnings",
                 "row_warnings", "n_targets", "n_ok", "n_targets_failed", "targets", "n_skipped", "skipped",
                 "caution", "exit_status")


def issue_dict(issue) -> dict:
    """A catalogue row problem as the JSON envelope lists it.

    Parameters
    ----------
    issue : RowIssue
        A problem the catalogue reader found (:class:`~rhofollow.core.types.RowIssue`).

    Returns
    -------
    dict
        ``{file, row, column, reason, name}``; ``row`` is the 1-based data row, 0 for the header
        or the whole file; a missing column or name is "".
    """
    return {"file": str(issue.source), "row": int(issue.row), "column": issue.column or "",
            "reason": issue.reason, "name": issue.name or ""}


def target_record(rec: dict) -> dict:
    """A copy of ``rec`` with the target keys in contract form: ``name``, ``ok``, ``errors``, ``warnings``.

    ``ok`` becomes false whenever ``errors`` is not empty, and a record marked not ok without a reason
    gets one, so that ``ok == (errors == [])`` holds for every target of every command.

    Parameters
    ----------
    rec : dict
        A stage's record of one target, with at least ``name``.

    Returns
    -------
    dict
        The contract keys first (errors and warnings as strings, repeated warnings once), then every
        other key of ``rec`` unchanged.
    """
    out = dict(rec)
    errors = [str(e) for e in (rec.get("errors") or [])]
    warnings = [str(w) for w in (rec.get("warnings") or [])]
    if not rec.get("ok", True) and not errors:
        errors = ["not computed (no reason recorded)"]
    out.update(name=str(rec["name"]), ok=not errors, errors=errors, warnings=list(dict.fromkeys(warnings)))
    # keep the contract keys first for a reader of the raw JSON
    return {k: out[k] for k in ("name", "ok", "errors", "warnings")} | {
        k: v for k, v in out.items() if k not in ("name", "ok", "errors", "warnings")}


def merge_stage_records(names, *stages, extra_warnings: dict | None = None) -> list[dict]:
    """One contract record per target name from several stages' records (assessment, occultation, RV).

    A target fails when any stage failed for it; its errors and warnings are the union of the stages'
    (first occurrence kept). ``stages`` are lists of dicts with ``name``/``ok``/``errors``/``warnings``;
    a stage that has no record for a name does not count. ``extra_warnings`` maps a name to more
    warnings (e.g. a target that never rises at the site).

    Parameters
    ----------
    names : iterable of str
        The targets, in output order.
    *stages : list of dict or None
        Each stage's records.
    extra_warnings : dict or None
        Target name -> list of further warnings.

    Returns
    -------
    list of dict
        ``{"name", "ok", "errors", "warnings"}`` per name, in the order of ``names``.
    """
    by_stage = [{r["name"]: r for r in recs or []} for recs in stages]
    out = []
    for name in names:
        errors, warnings, ok = [], [], True
        for st in by_stage:
            r = st.get(name)
            if r is None:
                continue
            ok = ok and bool(r.get("ok", True))
            errors += [e for e in r.get("errors") or [] if e not in errors]
            warnings += [w for w in r.get("warnings") or [] if w not in warnings]
        warnings += [w for w in (extra_warnings or {}).get(name, []) if w not in warnings]
        out.append({"name": name, "ok": ok and not errors, "errors": errors, "warnings": warnings})
    return out


def _catalogue_parts(catalogue):
    """(path, n_rows, row errors, row warnings) of a CatalogueResult, a path, or None."""
    if catalogue is None:
        return None, None, [], []
    if isinstance(catalogue, (str, bytes)) or hasattr(catalogue, "__fspath__"):
        return str(catalogue), None, [], []
    issues = list(getattr(catalogue, "issues", []))
    return (str(catalogue.source), int(catalogue.n_rows),
            [issue_dict(i) for i in issues if i.severity == "error"],
            [issue_dict(i) for i in issues if i.severity != "error"])


def exit_status(doc: dict) -> int:
    """The exit status of an envelope: 1 when any row or target failed, else 0.

    Parameters
    ----------
    doc : dict
        An envelope with ``n_row_errors`` and ``n_targets_failed``.

    Returns
    -------
    int
        :data:`EXIT_FAILED` or :data:`EXIT_OK`.
    """
    return EXIT_FAILED if doc["n_row_errors"] or doc["n_targets_failed"] else EXIT_OK


def envelope(command: str, *, catalogue=None, seed=None, targets=(), skipped=(), payload: dict | None = None,
             caution: str = CAUTION, row_errors=None, n_rows=None) -> dict:
    """The JSON document of one command run (see the module docstring for the contract).

    Parameters
    ----------
    command : str
        The command name (``"assess"``, ``"night"``, ``"log update"``, ...).
    catalogue : CatalogueResult, path or None
        :class:`~rhofollow.core.types.CatalogueResult` (gives the path, ``n_rows`` and the row
        problems), a path, or None for a command that reads no catalogue.
    seed : int or None
        The run seed (None for commands without random draws).
    targets : iterable of dict
        Per-target dicts with at least ``name``; ``ok``/``errors``/``warnings`` are normalised by
        :func:`target_record`, every other key is kept.
    skipped : iterable of dict
        ``{"name", "reason"}`` items left out; entries naming a failed target are dropped (the
        failure is in that target's ``errors``).
    payload : dict or None
        The command's own keys, added after the envelope keys (must not reuse them).
    caution : str
        The caution text the document carries.
    row_errors : list of dict or None
        Row errors overriding what ``catalogue`` gives.
    n_rows : int or None
        Number of data rows overriding what ``catalogue`` gives.

    Returns
    -------
    dict
        The envelope keys (:data:`ENVELOPE_KEYS`, in order; counts equal their lists' lengths) and
        then the payload.

    Raises
    ------
    ValueError
        A payload key is an envelope key.
    """
    path, rows, errs, warns = _catalogue_parts(catalogue)
    if row_errors is not None:
        errs = list(row_errors)
    if n_rows is not None:
        rows = int(n_rows)
    recs = [target_record(t) for t in targets]
    failed = {t["name"] for t in recs if not t["ok"]}
    skip = [{"name": str(s["name"]), "reason": str(s["reason"])} for s in skipped if s["name"] not in failed]
    n_ok = sum(t["ok"] for t in recs)
    doc = {"command": command, "catalogue": path, "seed": seed, "n_rows": rows,
           "n_rows_failed": len({e["row"] for e in errs if e["row"] > 0}), "n_row_errors": len(errs), "row_errors": errs, "n_row_warnings": len(warns), "row_warnings": warns,
           "n_targets": len(recs), "n_ok": n_ok, "n_targets_failed": len(recs) - n_ok, "targets": recs,
           "n_skipped": len(skip), "skipped": skip, "caution": caution}
    doc["exit_status"] = exit_status(doc)
    clash = set(payload or {}) & set(ENVELOPE_KEYS)
    if clash:
        raise ValueError(f"payload keys {sorted(clash)} are envelope keys")
    doc.update(payload or {})
    return doc
