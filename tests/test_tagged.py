"""Tagged PDF (``report.tagged: true``): the parts' structure trees kept through the merge.

Read back with pypdf, not with the pikepdf (qpdf) that wrote the file. The rules checked are
those of ISO 32000-1, 14.7 and 14.8 (logical structure, Tagged PDF; from memory): the catalog's
``/StructTreeRoot`` and ``/MarkInfo << /Marked true >>``; each page's ``/StructParents`` key in
the ``/ParentTree``; each marked-content id of a page referenced by exactly one element; the
standard structure types H1-H3, TH, Figure with ``/Alt``; page numbers as artifacts.
"""
from __future__ import annotations

import io
import re
import shutil
from collections import Counter
from datetime import datetime, timezone
from pathlib import Path

import pytest
from pypdf import PdfReader
from pypdf.generic import ArrayObject, DictionaryObject, IndirectObject

from reportgen import pipeline
from reportgen.errors import InputError
from reportgen.pdf.engine import render_pdf
from reportgen.pdf.weasy import asks_for_tags, parse_xml

DEMO = Path(__file__).resolve().parent.parent / "demo_project"
NOW = datetime(2030, 1, 15, 9, 30, tzinfo=timezone.utc)
MARKED = re.compile(rb"<<\s*/MCID\s+(\d+)\s*>>\s*BDC")


def test_a_part_asks_for_tags_in_its_head() -> None:
    asking = parse_xml('<html><head><meta name="reportgen-tagged" content="yes"/></head>'
                       "<body><p>x</p></body></html>")
    plain = parse_xml("<html><head></head><body><meta name='reportgen-tagged' content='yes'/>"
                      "</body></html>")
    assert asks_for_tags(asking) and not asks_for_tags(plain)


def test_report_tagged_must_be_true_or_false(make_project) -> None:
    root = make_project()
    text = (root / "project.yaml").read_text(encoding="utf-8")
    (root / "project.yaml").write_text(text + "report:\n  tagged: sometimes\n", encoding="utf-8")
    with pytest.raises(InputError) as caught:
        pipeline.validate_only(root)
    assert [(p.file, p.field) for p in caught.value.problems] == [("project.yaml", "report.tagged")]


def _root(pdf: PdfReader) -> DictionaryObject:
    return pdf.trailer["/Root"].get_object()


def _page_number(reference: object) -> int:
    """The object number of a page reference (``/Pg``)."""
    assert isinstance(reference, IndirectObject)
    return reference.idnum


def _structure(pdf: PdfReader) -> dict:
    """Walk the tree from the root: MCIDs referenced per (page, MCID), headings and figures
    in tree order, TH count."""
    pages = {page.indirect_reference.idnum: number for number, page in enumerate(pdf.pages)}
    found: dict = {"refs": Counter(), "headings": [], "figures": [], "th": 0, "kinds": Counter()}

    def walk(element: object, page: int | None) -> None:
        element = element.get_object() if isinstance(element, IndirectObject) else element
        if isinstance(element, int):
            found["refs"][(page, int(element))] += 1
            return
        assert isinstance(element, DictionaryObject)
        if element.get("/Type") == "/MCR":
            found["refs"][(_page_number(element.raw_get("/Pg")), int(element["/MCID"]))] += 1
            return
        if element.get("/Type") == "/OBJR":
            return
        kind = str(element["/S"])
        found["kinds"][kind] += 1
        own = _page_number(element.raw_get("/Pg")) if "/Pg" in element else page
        if kind in ("/H1", "/H2", "/H3"):
            found["headings"].append((kind, pages.get(own)))
        if kind == "/Figure":
            found["figures"].append(str(element.get("/Alt", "")))
        if kind == "/TH":
            found["th"] += 1
        kids = element.get("/K")
        for kid in (list(kids) if isinstance(kids, ArrayObject) else [kids]) \
                if kids is not None else ():
            walk(kid, own)

    walk(_root(pdf)["/StructTreeRoot"]["/K"], None)
    return found


def _marked(pdf: PdfReader) -> Counter:
    found: Counter = Counter()
    for page in pdf.pages:
        contents = page["/Contents"]
        streams = list(contents) if isinstance(contents, ArrayObject) else [contents]
        for stream in streams:
            for match in MARKED.finditer(stream.get_object().get_data()):
                found[(page.indirect_reference.idnum, int(match.group(1)))] += 1
    return found


@pytest.fixture(scope="module")
def tagged_demo(tmp_path_factory: pytest.TempPathFactory) -> PdfReader:
    base = tmp_path_factory.mktemp("tagged")
    project = base / "project"
    shutil.copytree(DEMO, project)
    # the demo asks for a Tagged PDF (report.tagged: true); the default is untagged
    assert "\n  tagged: true\n" in (project / "project.yaml").read_text(encoding="utf-8")
    pipeline.build(project, base / "out", now=NOW)
    return PdfReader(base / "out" / "report.pdf")


@pytest.mark.slow
def test_the_tagged_demo_has_one_structure_tree_marked_with_its_language(
        tagged_demo: PdfReader) -> None:
    root = _root(tagged_demo)
    assert bool(root["/MarkInfo"]["/Marked"]) is True
    assert str(root["/Lang"]) == "en"                     # templates/report.html.j2: lang="en"
    tree = root["/StructTreeRoot"]
    assert tree["/Type"] == "/StructTreeRoot" and tree["/K"]["/S"] == "/Document"
    xmp = root["/Metadata"].get_object().get_data()
    assert re.search(rb"<pdfaid:conformance>U</pdfaid:conformance>", xmp)


@pytest.mark.slow
def test_the_parent_tree_covers_every_page_and_annotation(tagged_demo: PdfReader) -> None:
    tree = _root(tagged_demo)["/StructTreeRoot"]
    nums = tree["/ParentTree"]["/Nums"]
    keys = [int(nums[index]) for index in range(0, len(nums), 2)]
    assert keys == sorted(keys) and len(set(keys)) == len(keys)  # a number tree's keys sorted
    assert int(tree["/ParentTreeNextKey"]) > max(keys)
    values = {int(nums[index]): nums[index + 1] for index in range(0, len(nums), 2)}
    page_keys = [int(page["/StructParents"]) for page in tagged_demo.pages]
    assert all(key in values for key in page_keys) and len(set(page_keys)) == len(page_keys)
    for page in tagged_demo.pages:
        for annotation in page.get("/Annots", []):
            annotation = annotation.get_object()
            if "/StructParent" in annotation:
                assert int(annotation["/StructParent"]) in values


@pytest.mark.slow
def test_every_marked_content_id_is_referenced_by_exactly_one_element(
        tagged_demo: PdfReader) -> None:
    marked = _marked(tagged_demo)
    refs = _structure(tagged_demo)["refs"]
    assert len(marked) > 1000
    assert set(marked) == set(refs)
    assert [key for key, count in marked.items() if count != 1] == []
    assert [key for key, count in refs.items() if count != 1] == []


@pytest.mark.slow
def test_headings_tables_and_figures_are_tagged_in_reading_order(
        tagged_demo: PdfReader) -> None:
    found = _structure(tagged_demo)
    kinds = {kind for kind, _page in found["headings"]}
    assert kinds == {"/H1", "/H2", "/H3"}
    pages = [page for _kind, page in found["headings"]]
    assert pages == sorted(pages)                     # tree order follows the pages
    assert found["headings"][0] == ("/H1", 0)         # the title on the cover
    assert found["th"] > 100 and found["kinds"]["/Table"] > 10
    assert found["figures"] and all(found["figures"])  # every figure has alternative text


@pytest.mark.slow
def test_the_page_stamp_is_an_artifact(tagged_demo: PdfReader) -> None:
    last = tagged_demo.pages[-1]["/Contents"]
    stamp = last[len(last) - 1].get_object().get_data()
    assert b"/Artifact BMC" in stamp and b"Page" in stamp and b"MCID" not in stamp


PAGE = ('<html lang="en"><head>%s<style>@page { size: A6; margin: 10mm } '
        "body { font-family: DejaVu Sans }</style></head><body><h1>%s</h1><p>text</p></body></html>")
ASK = '<meta name="reportgen-tagged" content="yes"/>'


def _render(front_head: str, body_head: str, root: Path) -> PdfReader:
    data = render_pdf(lambda page_of, total: PAGE % (front_head, "Front"),
                      [PAGE % (body_head, "Body")], root=root, title="t", created=NOW)
    return PdfReader(io.BytesIO(data))


def test_small_tagged_parts_merge_into_one_tree(tmp_path: Path) -> None:
    pdf = _render(ASK, ASK, tmp_path)
    assert bool(_root(pdf)["/MarkInfo"]["/Marked"]) is True
    found = _structure(pdf)
    assert [kind for kind, _page in found["headings"]] == ["/H1", "/H1"]
    assert [page for _kind, page in found["headings"]] == [0, 1]   # front first, then the body
    assert set(_marked(pdf)) == set(found["refs"])


def test_a_part_without_tags_leaves_the_whole_file_untagged(tmp_path: Path) -> None:
    # no half-tagged file: the front matter is tagged, the body is not
    pdf = _render(ASK, "", tmp_path)
    assert "/StructTreeRoot" not in _root(pdf) and "/MarkInfo" not in _root(pdf)
    assert all("/StructParents" not in page for page in pdf.pages)
