"""The project inside report.pdf, its manifest and digest, and ``reportgen verify``.

SHA-256 values are computed here with Python's hashlib (the standard library's
implementation of FIPS 180-4), never taken from the code under test; the hashlib check
value is FIPS 180-2, Appendix B.1 (SHA-256 of "abc").
"""
from __future__ import annotations

import hashlib
import io
import json
import shutil
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import pikepdf  # only to tamper with a built report (an edit by another tool)
import pytest
from pypdf import PdfReader, PdfWriter

from reportgen import cli, pipeline
from reportgen.errors import ReportgenError
from reportgen.export import manifest

DEMO = Path(__file__).resolve().parent.parent / "demo_project"
NOW = datetime(2030, 1, 15, 9, 30, tzinfo=timezone.utc)
# FIPS 180-2, Appendix B.1: SHA-256("abc")
SHA256_ABC = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"


def sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def test_hashlib_is_fips_sha256() -> None:
    assert sha256(b"abc") == SHA256_ABC
    assert manifest.sha256_hex(b"abc") == SHA256_ABC


def test_manifest_lists_every_input_and_results_csv_with_size_and_sha256(
        make_project) -> None:
    project = pipeline.validate_only(make_project())
    inputs = {path: (project.root / path).read_bytes() for path in project.files_read}
    document = manifest.manifest_document(project, inputs, b"x\n", version="9.9",
                                          now=NOW, application_table="table v1")
    assert [entry["path"] for entry in document["files"]] == [
        "project/" + path for path in sorted(project.files_read)] + ["results.csv"]
    for entry in document["files"][:-1]:
        data = (project.root / entry["path"].removeprefix("project/")).read_bytes()
        assert (entry["size"], entry["sha256"]) == (len(data), sha256(data))
    assert document["files"][-1] == {"path": "results.csv", "role": "output", "size": 2,
                                     "sha256": sha256(b"x\n")}
    assert document["limit_set"] == project.limits.id
    assert document["application_table"] == "table v1"
    assert document["generator"] == "reportgen 9.9"


def test_data_only_build_writes_the_manifest_digest_into_summary_json(
        make_project, tmp_path: Path) -> None:
    out = tmp_path / "out"
    pipeline.build(make_project(), out, now=NOW, report=False)
    summary = json.loads((out / "summary.json").read_bytes())
    digest = summary["archive"]["manifest_sha256"]
    assert len(digest) == 64 and int(digest, 16) >= 0
    assert summary["archive"]["manifest"] == "manifest.json"


def test_verify_refuses_what_is_not_a_pdf(tmp_path: Path,
                                          capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "report.pdf"
    path.write_text("link_id,loss_db\nA-1,1.0\n", encoding="utf-8")
    assert cli.main(["verify", str(path)]) == 2
    assert "not a PDF" in capsys.readouterr().err


def test_verify_refuses_a_pdf_without_our_manifest(tmp_path: Path,
                                                   capsys: pytest.CaptureFixture[str]) -> None:
    writer = PdfWriter()
    writer.add_blank_page(200, 200)
    path = tmp_path / "other.pdf"
    with path.open("wb") as file:
        writer.write(file)
    assert cli.main(["verify", str(path)]) == 2
    assert "no manifest.json inside" in capsys.readouterr().err


# ---------------------------------------------------------------- the demo, built

@pytest.fixture(scope="module")
def demo_build(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("demo") / "out"
    pipeline.build(DEMO, out, now=NOW)
    return out


@pytest.mark.slow
def test_two_builds_are_byte_identical(demo_build: Path, tmp_path: Path) -> None:
    again = tmp_path / "again"
    pipeline.build(DEMO, again, now=NOW)
    for name in ("report.pdf", "report.html", "results.csv", "summary.json"):
        assert (again / name).read_bytes() == (demo_build / name).read_bytes(), name


@pytest.mark.slow
def test_report_carries_the_project_and_the_digest_everywhere(demo_build: Path) -> None:
    attached = PdfReader(demo_build / "report.pdf").attachments
    files = {name: data[0] for name, data in attached.items()}
    for path in ("project.yaml", "links.csv", "results/day1-building-a.csv"):
        assert files["project/" + path] == (DEMO / path).read_bytes()
    assert files["results.csv"] == (demo_build / "results.csv").read_bytes()
    assert files["summary.json"] == (demo_build / "summary.json").read_bytes()
    digest = sha256(files["manifest.json"])
    summary = json.loads((demo_build / "summary.json").read_bytes())
    assert summary["archive"]["manifest_sha256"] == digest
    listed = {entry["path"]: entry["sha256"] for entry in json.loads(files["manifest.json"])["files"]}
    assert listed["results.csv"] == sha256(files["results.csv"])
    texts = [page.extract_text() for page in PdfReader(demo_build / "report.pdf").pages]
    assert digest in texts[0].replace("\n", "")
    assert all(f"Digest {digest[:16]}" in text for text in texts)
    html = (demo_build / "report.html").read_text(encoding="utf-8")
    assert digest in html


@pytest.mark.slow
def test_verify_passes_on_the_demo_with_its_project(
        demo_build: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert cli.main(["verify", str(demo_build / "report.pdf"), "--project", str(DEMO)]) == 0
    out = capsys.readouterr().out
    assert "FAIL" not in out and "verdicts follow from the data: results.csv" in out
    assert out.rstrip().endswith("checks hold")


def _tamper_results_csv(source: Path, target: Path) -> None:
    """Change one byte of the embedded results.csv; qpdf writes a fresh cross-reference."""
    with pikepdf.open(source) as pdf:
        spec = pdf.attachments["results.csv"]
        stream = spec.obj.EF.F
        data = bytearray(stream.read_bytes())
        line_end = data.index(b"\n")  # first data row: change the last digit of its loss
        row_end = data.index(b"\n", line_end + 1)
        row = bytes(data[line_end + 1:row_end])
        cells = row.split(b",")
        loss = cells[4]
        cells[4] = loss[:-1] + (b"1" if loss[-1:] != b"1" else b"2")
        data[line_end + 1:row_end] = b",".join(cells)
        stream.write(bytes(data))
        pdf.save(target)


@pytest.mark.slow
def test_one_byte_changed_in_the_embedded_results_csv_fails_naming_it(
        demo_build: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    tampered = tmp_path / "tampered.pdf"
    _tamper_results_csv(demo_build / "report.pdf", tampered)
    assert cli.main(["verify", str(tampered)]) == 1
    out = capsys.readouterr().out
    assert "FAIL  embedded file results.csv: changed" in out
    assert "FAIL  verdicts follow from the data: results.csv: results.csv line 2" in out
    assert "loss_db embedded" in out


@pytest.mark.slow
def test_one_input_changed_in_the_project_folder_fails_naming_it(
        demo_build: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    project = tmp_path / "project"
    shutil.copytree(DEMO, project)
    retests = project / "results" / "day2-campus.csv"
    retests.write_bytes(retests.read_bytes() + b"\n")   # one byte more, still valid
    assert cli.main(["verify", str(demo_build / "report.pdf"), "--project", str(project)]) == 1
    out = capsys.readouterr().out
    assert "results/day2-campus.csv differs from the copy in the report" in out
    assert out.count("FAIL") == 1  # the project check only; the report itself holds


# ---------------------------------------------------------------- signing

def _key_and_certificate(tmp_path: Path, name: str, password: bytes | None) -> tuple[Path, Path]:
    """A fresh RSA key and self-signed certificate (made here with the cryptography package)."""
    import datetime as dt

    from cryptography import x509
    from cryptography.hazmat.primitives import hashes, serialization
    from cryptography.hazmat.primitives.asymmetric import rsa
    from cryptography.hazmat.primitives.serialization import pkcs12
    from cryptography.x509.oid import NameOID

    key = rsa.generate_private_key(public_exponent=65537, key_size=2048)
    subject = x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, name)])
    start = dt.datetime(2026, 1, 1, tzinfo=dt.timezone.utc)
    cert = (x509.CertificateBuilder().subject_name(subject).issuer_name(subject)
            .public_key(key.public_key()).serial_number(x509.random_serial_number())
            .not_valid_before(start).not_valid_after(start + dt.timedelta(days=3650))
            .add_extension(x509.BasicConstraints(ca=True, path_length=None), critical=True)
            .add_extension(x509.KeyUsage(True, True, False, False, False, True, False, False,
                                         False), critical=True)
            .sign(key, hashes.SHA256()))
    encryption = (serialization.BestAvailableEncryption(password) if password
                  else serialization.NoEncryption())
    p12, pem = tmp_path / f"{name}.p12", tmp_path / f"{name}.pem"
    p12.write_bytes(pkcs12.serialize_key_and_certificates(b"k", key, cert, None, encryption))
    pem.write_bytes(cert.public_bytes(serialization.Encoding.PEM))
    return p12, pem


def test_signing_key_password_from_the_environment_never_an_argument(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    p12, _ = _key_and_certificate(tmp_path, "Example Signer", b"secret")
    monkeypatch.setenv(cli.SIGN_PASSWORD_VARIABLE, "secret")
    assert cli._signing_key(p12).subject == "Example Signer"
    monkeypatch.setenv(cli.SIGN_PASSWORD_VARIABLE, "wrong")
    with pytest.raises(ReportgenError, match="wrong password"):
        cli._signing_key(p12)
    monkeypatch.delenv(cli.SIGN_PASSWORD_VARIABLE)
    monkeypatch.setattr("sys.stdin", io.StringIO(""))   # no terminal to ask on
    with pytest.raises(ReportgenError, match=cli.SIGN_PASSWORD_VARIABLE):
        cli._signing_key(p12)
    assert "--password" not in [param.opts[0] for param in cli.build.params]


def test_a_pkcs12_file_without_a_password_is_accepted(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    p12, _ = _key_and_certificate(tmp_path, "Open Signer", None)
    monkeypatch.delenv(cli.SIGN_PASSWORD_VARIABLE, raising=False)
    assert cli._signing_key(p12).subject == "Open Signer"


@pytest.fixture(scope="module")
def signed(demo_build: Path, tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Path]:
    from reportgen.pdf.sign import load_signing_key, sign_pdf

    folder = tmp_path_factory.mktemp("signed")
    p12, pem = _key_and_certificate(folder, "Example Signer", b"secret")
    key = load_signing_key(p12.read_bytes(), b"secret", str(p12))
    path = folder / "report.pdf"
    path.write_bytes(sign_pdf((demo_build / "report.pdf").read_bytes(), {}, key=key))
    return path, pem


@pytest.mark.slow
def test_signed_report_passes_integrity_and_trust(
        signed: tuple[Path, Path], demo_build: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path, pem = signed
    # the signature is an incremental update: the archive file before it stays as built
    assert path.read_bytes().startswith((demo_build / "report.pdf").read_bytes())
    assert cli.main(["verify", str(path), "--trust", str(pem)]) == 0
    out = capsys.readouterr().out
    assert "ok    signature ReportSignature: integrity: signed by Example Signer" in out
    assert "ok    signature ReportSignature: trust" in out


# ISO 19005-1, 6.7.3, Table 1 (from memory; PDF/A-3 keeps the rule, 6.6.2.3): each entry of
# the document information dictionary, when present, equals its XMP property.
INFO_XMP = {"/Title": "dc:title", "/Author": "dc:creator", "/Creator": "xmp:CreatorTool",
            "/Producer": "pdf:Producer", "/CreationDate": "xmp:CreateDate",
            "/ModDate": "xmp:ModifyDate"}


def _pdf_date(text: str) -> datetime:
    # ISO 32000-1, 7.9.4: D:YYYYMMDDHHmmSS then Z or +HH'mm' (from memory)
    body = text.removeprefix("D:")
    moment = datetime.strptime(body[:14], "%Y%m%d%H%M%S")
    zone = body[14:].replace("'", "")
    if zone in ("", "Z"):
        return moment.replace(tzinfo=timezone.utc)
    return datetime.strptime(body[:14] + zone[:5], "%Y%m%d%H%M%S%z")


def _aware(moment: datetime) -> datetime:
    return moment if moment.tzinfo is not None else moment.replace(tzinfo=timezone.utc)


def _xmp(pdf: PdfReader) -> dict[str, Any]:
    """The XMP properties the tests compare, read by pypdf (element or attribute form)."""
    meta = pdf.xmp_metadata
    assert meta is not None
    return {"dc:title": meta.dc_title.get("x-default"), "dc:creator": meta.dc_creator,
            "xmp:CreatorTool": meta.xmp_creator_tool, "pdf:Producer": meta.pdf_producer,
            "xmp:CreateDate": meta.xmp_create_date, "xmp:ModifyDate": meta.xmp_modify_date,
            "pdfaid:part": meta.pdfaid_part, "pdfaid:conformance": meta.pdfaid_conformance}


def _info(pdf: PdfReader) -> dict[str, str]:
    return {key: str(value) for key, value in pdf.trailer["/Info"].get_object().items()}


def _info_differences(pdf: PdfReader) -> list[str]:
    meta = _xmp(pdf)
    docinfo = _info(pdf)
    found = []
    for key, prop in INFO_XMP.items():
        if key not in docinfo:
            continue
        info, xmp = docinfo[key], meta.get(prop)
        if key.endswith("Date"):
            same = xmp is not None and _pdf_date(info) == _aware(xmp)
        elif prop == "dc:creator":
            same = xmp == [info]
        else:
            same = xmp == info
        if not same:
            found.append(f"{key} {info!r} but {prop} {xmp!r}")
    return found


@pytest.mark.slow
def test_signing_keeps_the_pdfa_identification_and_info_equal_to_xmp(
        signed: tuple[Path, Path], demo_build: Path) -> None:
    path, _ = signed
    before, after = PdfReader(demo_build / "report.pdf"), PdfReader(path)
    assert _info_differences(before) == [] and _info_differences(after) == []
    meta = _xmp(after)
    # ISO 19005-3, 6.6.4 (from memory): part 3; level U, every font maps to Unicode
    assert (str(meta["pdfaid:part"]), meta["pdfaid:conformance"]) == ("3", "U")
    assert _xmp(before)["pdfaid:conformance"] == "U"
    # what pyHanko changes: the producer (XMP, and Info which had none) and the
    # modification date (XMP only: Info has none, and pyHanko only updates one present)
    info_before, info_after = _info(before), _info(after)
    assert "/Producer" not in info_before and "/ModDate" not in info_before
    assert meta["pdf:Producer"] == info_after["/Producer"]
    assert meta["pdf:Producer"].startswith("pyHanko")
    assert "/ModDate" not in info_after
    # the signing time, from the clock (the build date is NOW)
    signed_at = _aware(meta["xmp:ModifyDate"])
    assert abs((datetime.now(timezone.utc) - signed_at).total_seconds()) < 3600
    for key in ("/Title", "/Author", "/Creator", "/CreationDate"):
        assert info_after[key] == info_before[key]
    assert after.trailer["/Root"]["/OutputIntents"][0].get_object()["/S"] == "/GTS_PDFA1"
    assert set(after.attachments) == set(before.attachments)


@pytest.mark.slow
def test_another_trust_certificate_fails_trust_but_passes_integrity(
        signed: tuple[Path, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path, _ = signed
    _, other = _key_and_certificate(tmp_path, "Someone Else", b"x")
    assert cli.main(["verify", str(path), "--trust", str(other)]) == 1
    out = capsys.readouterr().out
    assert "ok    signature ReportSignature: integrity" in out
    assert "FAIL  signature ReportSignature: trust" in out


@pytest.mark.slow
def test_a_report_changed_after_signing_fails_integrity(
        signed: tuple[Path, Path], tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path, pem = signed
    data = bytearray(path.read_bytes())
    # ISO 32000-1, 7.5.2: the header's second line is a comment of binary bytes; changing
    # one keeps the file readable and lies inside the signed byte range.
    assert data[9:10] == b"%"
    data[10] ^= 0x01
    changed = tmp_path / "changed.pdf"
    changed.write_bytes(bytes(data))
    assert cli.main(["verify", str(changed), "--trust", str(pem)]) == 1
    out = capsys.readouterr().out
    assert "FAIL  signature ReportSignature: integrity" in out
    assert "signed bytes were changed" in out
