"""The archive pages of ``calib serve``: search, one record, its PDF, verification, chain, trend."""

from __future__ import annotations

from typing import Any

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


async def archive_page(request: Request) -> Response:
    query = {k: " ".join(request.query_params.get(k, "").split())
             for k in ("analyte", "from", "to", "verdict", "instrument")}
    for key in ("from", "to"):
        if query[key]:
            pages.check_date(query[key], key)
    if query["verdict"] and query["verdict"] not in ("accepted", "rejected", "needs-review"):
        raise PageError(f"Unknown verdict {query['verdict']!r}: choose one from the list.")
    with _store(request) as store:
        found = store.entries(analyte=query["analyte"] or None, verdict=query["verdict"] or None,
                              instrument=query["instrument"] or None,
                              date_from=query["from"] or None, date_to=query["to"] or None,
                              data=False)
        analytes = store.analytes()
    return _render(request, "archive.html", query=query, entries=found, analytes=analytes)


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
