"""The archive pages of ``calib serve``: search, one record, its PDF, verification, chain, trend."""

from __future__ import annotations

from typing import Any
from urllib.parse import urlencode

from starlette.concurrency import run_in_threadpool
from starlette.requests import Request
from starlette.responses import Response

from calib.web import pages
from calib.web.base import PageError, _archive_path, _attachment, _render
from calib.web.state import private_copy

__all__ = ["archive_chain", "archive_page", "archive_pdf", "archive_record",
           "archive_verify_record", "trend_page"]


def _store(request: Request) -> Any:
    from calib.archive import Archive

    return Archive(_archive_path(request), create=False)


#: Rows on one page of the archive listing.
PAGE_ROWS = 25


def _page_number(text: str) -> int:
    if not text:
        return 1
    if not text.isdigit() or not 1 <= int(text) <= 1_000_000:
        raise PageError(f"The page number must be a whole number from 1; got {text!r}.")
    return int(text)


async def archive_page(request: Request) -> Response:
    query = {k: " ".join(request.query_params.get(k, "").split())
             for k in ("analyte", "from", "to", "verdict", "instrument")}
    for key in ("from", "to"):
        if query[key]:
            pages.check_date(query[key], key)
    if query["verdict"] and query["verdict"] not in ("accepted", "rejected", "needs-review"):
        raise PageError(f"Unknown verdict {query['verdict']!r}: choose one from the list.")
    number = _page_number(request.query_params.get("page", ""))
    with _store(request) as store:
        analytes = store.analytes()
        if query["analyte"]:
            # One row per curve of every analyte whose name holds the words typed, with
            # that curve's own verdict (not the run's).
            wanted = query["analyte"].casefold()
            matched = [a for a in analytes if wanted in a.casefold()]
            rows: list[Any] = [
                c for name in matched for c in store.curve_history(
                    name, instrument=query["instrument"] or None)
                if (not query["verdict"] or c.figures.verdict == query["verdict"])
                and (not query["from"] or c.run_date >= query["from"])
                and (not query["to"] or c.run_date <= query["to"])]
            rows.sort(key=lambda c: (c.seq, c.figures.position))
        else:
            matched = []
            rows = store.entries(verdict=query["verdict"] or None,
                                 instrument=query["instrument"] or None,
                                 date_from=query["from"] or None, date_to=query["to"] or None,
                                 data=False)
    pages_total = max(1, -(-len(rows) // PAGE_ROWS))
    if number > pages_total:
        raise PageError(f"There is no page {number}: the search found {len(rows)} row"
                        f"{'' if len(rows) == 1 else 's'} ({pages_total} page"
                        f"{'' if pages_total == 1 else 's'}).", 404)
    shown = rows[(number - 1) * PAGE_ROWS:number * PAGE_ROWS]
    keep = {k: v for k, v in query.items() if v}
    return _render(request, "archive.html", query=query, rows=shown, by_analyte=bool(
        query["analyte"]), matched=matched, analytes=analytes, found=len(rows), page=number,
        pages_total=pages_total, first=(number - 1) * PAGE_ROWS + 1 if rows else 0,
        last=(number - 1) * PAGE_ROWS + len(shown),
        page_link=lambda n: "/archive?" + urlencode({**keep, "page": n}))


async def archive_record(request: Request) -> Response:
    record_id = request.path_params["record_id"]
    with _store(request) as store:
        versions = store.entries(record_id=record_id)
    if not versions:
        raise PageError(f"No record {record_id} in the archive.", 404)
    return _render(request, "record.html", view=pages.record_view(versions))


async def archive_pdf(request: Request) -> Response:
    record_id, seq = request.path_params["record_id"], request.path_params["seq"]
    with _store(request) as store:
        versions = store.entries(record_id=record_id)
    entry = next((v for v in versions if v.seq == seq), None)
    if entry is None:
        raise PageError(f"No entry seq {seq} of record {record_id} in the archive.", 404)
    return _attachment(f"{entry.record_id}-seq{entry.seq}.pdf", "application/pdf", entry.pdf)


async def archive_verify_record(request: Request) -> Response:
    record_id = request.path_params["record_id"]

    def verify() -> Any:
        from calib import service

        with _store(request) as store:
            versions = store.entries(record_id=record_id)
        if not versions:
            raise PageError(f"No record {record_id} in the archive.", 404)
        latest = versions[-1]
        with private_copy(f"{latest.record_id}.pdf", latest.pdf) as path:
            return versions, service.verify(path, keyring=request.app.state.keyring,
                                            archive=_archive_path(request))

    versions, report = await run_in_threadpool(verify)
    return _render(request, "record.html", view=pages.record_view(versions),
                   verified=pages.verify_view(report, f"{record_id} (latest version)"))


async def archive_chain(request: Request) -> Response:
    with _store(request) as store:
        report = store.verify_chain()
    return _render(request, "chain.html", report=report)


async def trend_page(request: Request) -> Response:
    analyte = " ".join(request.query_params.get("analyte", "").split())
    with _store(request) as store:
        analytes = store.analytes()
        trend = store.trend(analyte) if analyte else None
    view = None
    if trend is not None:
        if not (trend.points or trend.left_out):
            raise PageError(f"No curve of {analyte!r} in the archive; analytes archived: "
                            + (", ".join(analytes) or "none") + ".", 404)
        view = await run_in_threadpool(pages.trend_view, trend)
    return _render(request, "trend.html", analyte=analyte, analytes=analytes, trend=view)
