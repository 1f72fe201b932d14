"""A forger's incremental update of a signed PDF that leaves every signed byte as it was:
page content drawn over the page, or an annotation laid over it (as a viewer's comment)."""

from __future__ import annotations

import io

from pyhanko.pdf_utils import generic
from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter

from webapp.records.signing import _off_thread


def appended(pdf: bytes, change: str, text: bytes = b"300") -> bytes:
    """`change` is "content" (a text drawn on page 1) or "annotation" (a white box over it)."""
    def run() -> bytes:
        writer = IncrementalPdfFileWriter(io.BytesIO(pdf))
        if change == "content":
            stream = generic.StreamObject(stream_data=b"BT /F1 12 Tf 72 72 Td (" + text
                                          + b") Tj ET")
            writer.add_stream_to_page(0, writer.add_object(stream))
        else:
            page = writer.root["/Pages"]["/Kids"][0].get_object()
            annot = writer.add_object(generic.DictionaryObject({
                generic.NameObject("/Type"): generic.NameObject("/Annot"),
                generic.NameObject("/Subtype"): generic.NameObject("/Square"),
                generic.NameObject("/Rect"): generic.ArrayObject(
                    [generic.FloatObject(v) for v in (60, 60, 400, 120)]),
                generic.NameObject("/IC"): generic.ArrayObject([generic.FloatObject(1)] * 3)}))
            annots = page.get("/Annots", generic.ArrayObject())
            annots.append(annot)
            page[generic.NameObject("/Annots")] = annots
            writer.update_container(page)
        out = io.BytesIO()
        writer.write(out)
        return out.getvalue()
    return _off_thread(run)
