"""The summary mail (.eml), through the CLI, parsed back with the standard library's :mod:`email` package.

The stdlib parser is the outside party: if it finds every cid: reference among the parts, the text alternative
and the attachment, a mail program reading the same MIME will too.
"""

from __future__ import annotations

import email
import io
import math
import re
from email import policy
from pathlib import Path

import openpyxl
import pytest
from click.testing import CliRunner

from lanesolve.cli import main
from lanesolve.errors import WriteError

EXAMPLE = Path(__file__).resolve().parent.parent / "example_workbooks" / "orvale_larder_supply.xlsx"


@pytest.fixture(scope="module")
def mailed(tmp_path_factory):
    folder = tmp_path_factory.mktemp("mail")
    solved, eml = folder / "solved.xlsx", folder / "plan.eml"
    run = CliRunner().invoke(main, ["solve", str(EXAMPLE), "--output", str(solved), "--email", str(eml),
                                    "--attach-workbook", "--json"])
    assert run.exit_code == 0, run.output
    import json

    doc = json.loads(run.stdout)
    return doc, solved, eml.read_bytes()


def parts(message):
    return list(message.walk())


def test_structure_is_alternative_with_related_html(mailed):
    _, _, raw = mailed
    message = email.message_from_bytes(raw, policy=policy.default)
    assert message.get_content_type() == "multipart/mixed"
    alternative = message.get_payload()[0]
    assert alternative.get_content_type() == "multipart/alternative"
    text, related = alternative.get_payload()
    assert text.get_content_type() == "text/plain"
    assert related.get_content_type() == "multipart/related"
    assert related.get_payload()[0].get_content_type() == "text/html"
    assert b"\r\n" in raw and b"\n" not in raw.replace(b"\r\n", b"")  # CR LF line ends throughout (RFC 5322)


def test_every_cid_reference_resolves_to_a_png_part(mailed):
    from PIL import Image

    _, _, raw = mailed
    message = email.message_from_bytes(raw, policy=policy.default)
    html = message.get_body(preferencelist=("html",)).get_content()
    references = re.findall(r'src="cid:([^"]+)"', html)
    assert len(references) == 3  # cost breakdown, network map, utilisation (the example has coordinates)
    by_id = {part["Content-ID"].strip("<>"): part for part in parts(message) if part["Content-ID"]}
    for ref in references:
        part = by_id[ref]
        assert part.get_content_type() == "image/png"
        assert part.get_content_disposition() == "inline"
        image = Image.open(io.BytesIO(part.get_content()))
        assert image.format == "PNG" and image.width > 400
    # Nothing else is referenced: no data: URIs or remote sources in the mail's HTML.
    assert not re.findall(r'src="(?!cid:)', html) and "http" not in html.lower()


def test_text_part_has_the_key_figures(mailed):
    doc, _, raw = mailed
    message = email.message_from_bytes(raw, policy=policy.default)
    text = message.get_body(preferencelist=("plain",)).get_content()
    # The figures from --json (the plan), formatted as a planner reads them.
    assert f"{doc['total_cost']:,.2f} EUR" in text
    assert "Lanes used:" in text and f" {len(doc['flows'])}" in text
    unmet = sum(u["quantity"] for u in doc["unmet"])
    assert "Unmet demand:" in text and f"{unmet:,.0f} pallets" in text
    assert "licensed professionals take precedence" in text


def test_attachment_is_the_solved_workbook(mailed):
    _, solved, raw = mailed
    message = email.message_from_bytes(raw, policy=policy.default)
    attachments = list(message.iter_attachments())
    assert [a.get_filename() for a in attachments] == ["solved.xlsx"]
    data = attachments[0].get_content()
    assert data == solved.read_bytes()
    assert attachments[0].get_content_type() == "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
    # openpyxl reads it back and finds the result sheets the run wrote.
    names = openpyxl.load_workbook(io.BytesIO(data), read_only=True).sheetnames
    assert any(n.startswith("LS ") for n in names)


def test_headers_draft_without_recipients(mailed):
    doc, _, raw = mailed
    message = email.message_from_bytes(raw, policy=policy.default)
    assert message["Subject"].startswith("Lane plan orvale_larder_supply.xlsx: Optimal plan, total cost ")
    assert f"{doc['total_cost']:,.2f}" in message["Subject"]
    assert message["X-Unsent"] == "1"
    assert message["Date"] and message["To"] is None and message["From"] is None
    # Content-IDs use the reserved .invalid domain, never this machine's host name (RFC 2606).
    assert all(p["Content-ID"].endswith("@lanesolve.invalid>") for p in parts(message) if p["Content-ID"])


def test_mail_without_attachment_has_no_mixed_wrapper(tmp_path):
    eml = tmp_path / "plan.eml"
    run = CliRunner().invoke(main, ["solve", str(EXAMPLE), "--output", str(tmp_path / "s.xlsx"),
                                    "--email", str(eml)])
    assert run.exit_code == 0, run.output
    message = email.message_from_bytes(eml.read_bytes(), policy=policy.default)
    assert message.get_content_type() == "multipart/alternative"
    assert list(message.iter_attachments()) == []
    assert f"Mail written to {eml}" in run.output


def test_no_plan_mail_says_why(tmp_path):
    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    for name, rows in {"Depots": [["depot", "supply"], ["D1", 10]],
                       "Customers": [["customer", "demand"], ["C1", 15]],
                       "Lanes": [["origin", "destination", "cost_per_unit"], ["D1", "C1", 1]]}.items():
        ws = wb.create_sheet(name)
        for row in rows:
            ws.append(row)
    path = tmp_path / "short.xlsx"
    wb.save(path)
    eml = tmp_path / "short.eml"
    run = CliRunner().invoke(main, ["solve", str(path), "--email", str(eml)])
    assert run.exit_code == 3  # hard demand 15 against supply 10: infeasible by counting
    message = email.message_from_bytes(eml.read_bytes(), policy=policy.default)
    assert "No feasible plan" in message["Subject"]
    text = message.get_body(preferencelist=("plain",)).get_content()
    assert "No plan was made" in text and "5" in text
    assert not [p for p in message.walk() if p.get_content_maintype() == "image"]


def test_attach_workbook_needs_email(tmp_path):
    run = CliRunner().invoke(main, ["solve", str(EXAMPLE), "--output", str(tmp_path / "s.xlsx"),
                                    "--attach-workbook"])
    assert run.exit_code == 2 and "--email" in run.output


def test_unwritable_mail_path_is_a_write_error(tmp_path):
    from lanesolve.report import mail
    from lanesolve.pipeline import run

    outcome = run(EXAMPLE, write=False)
    with pytest.raises(WriteError, match="no-such-folder"):
        mail.write_email(tmp_path / "no-such-folder" / "x.eml", outcome.network, outcome.result, outcome.info, [])
    with pytest.raises(WriteError, match="attach"):
        mail.write_email(tmp_path / "x.eml", outcome.network, outcome.result, outcome.info, [],
                         attach=tmp_path / "missing.xlsx")
    assert not (tmp_path / "x.eml").exists()
    assert math.isfinite(outcome.result.total_cost)
