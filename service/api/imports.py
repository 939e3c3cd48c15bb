"""The inventory spreadsheet import by upload: a dry run reports every row; a real run writes all or none."""

from __future__ import annotations

from flask import jsonify, request

from service import schemas
from service.api import bp
from service.api.errors import ApiError
from service.api.responses import ImportReport
from service.appdata import catalogue
from service.operations import operation
from service.present.imports import dump_report
from service.store.db import get_session
from service.store.importer import MAX_UPLOAD_BYTES, SUFFIXES, import_inventory, lookup_in, read_upload


@bp.post("/stocks/import", endpoint="import_stocks")
@operation(query=schemas.ImportQuery, upload="file", response=ImportReport, status=200)
def import_stocks():
    """Check a CSV or XLSX inventory (multipart field ``file``) row by row; with dry_run=false, import it.

    A real run writes every row in one transaction, or nothing when a row is rejected (answered 422
    with the report) unless only_valid=true asks for the accepted rows alone.
    """
    query = schemas.ImportQuery.model_validate(request.args.to_dict())
    upload = request.files.get("file")
    if upload is None or not upload.filename:
        raise ApiError(422, "invalid_input", "send the spreadsheet as the multipart field 'file'",
                       [{"field": "file", "message": f"required: a {' or '.join(SUFFIXES)} file"}])
    try:
        data = upload.stream.read(MAX_UPLOAD_BYTES + 1)  # one byte more: a larger file shows as such
    finally:
        upload.close()  # a large upload is spooled to a temporary file: closed at once
    frame = read_upload(upload.filename, data)
    report = import_inventory(get_session(), frame, catalogue_lookup=lookup_in(catalogue()), dry_run=query.dry_run,
                              only_valid=query.only_valid)
    answer = dump_report(report, upload.filename)
    if report.withheld:
        raise ApiError(422, "rows_rejected", f"nothing imported: {answer['rejected']} of {answer['rows']} row(s) "
                       "rejected; correct them, or import the accepted rows alone with only_valid=true", answer)
    return jsonify(answer)

