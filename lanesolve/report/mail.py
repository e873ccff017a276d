"""The summary as a ready-to-send mail: an ``.eml`` file a mail program opens as a message.

Structure (MIME)::

    multipart/mixed                      only when the solved workbook is attached
      multipart/alternative
        text/plain                       the key figures and tables as text, for text-only readers
        multipart/related
          text/html                      the summary page, charts referenced as cid:...
          image/png  (one per chart)     Content-ID matching each cid: reference, inline
      application/vnd...sheet            the solved workbook (``--attach-workbook``)

This nesting -- related inside alternative -- is the one the Python standard library's email examples build and
the one common mail programs write themselves (recalled from memory). Charts are PNG here, not SVG as in the HTML
file, because mail programs do not show SVG reliably (common practice).

The message has a Subject and a Date but no From or To: the planner fills in the recipients in the mail program.
The ``X-Unsent: 1`` header makes some mail programs open the file as a draft ready to send rather than as a received
message (common practice, recalled from memory; programs that do not know it simply ignore it).
"""

from __future__ import annotations

import os
from email import policy
from email.message import EmailMessage
from email.utils import formatdate, make_msgid
from pathlib import Path
from typing import TYPE_CHECKING

from lanesolve import __version__
from lanesolve.write import atomic
from lanesolve.write import paths
from lanesolve.report import summary, text
from lanesolve.report import charts as _charts
from lanesolve.errors import WriteError
from lanesolve.model.result import Result

if TYPE_CHECKING:
    import pandas as pd

    from lanesolve.model.network import Network
    from lanesolve.runinfo import RunInfo

#: Content types of the workbooks lanesolve writes (Office Open XML; .xlsm keeps its macros and says so).
WORKBOOK_TYPES = {
    ".xlsx": ("application", "vnd.openxmlformats-officedocument.spreadsheetml.sheet"),
    ".xlsm": ("application", "vnd.ms-excel.sheet.macroEnabled.12"),
}

#: Domain part of the Content-IDs: a name of our own under the reserved .invalid top-level domain (RFC 2606), so
#: the machine's host name never ends up in a mail.
CID_DOMAIN = "lanesolve.invalid"

#: Lines end in CR LF in the file, as on the wire (RFC 5322), which is what mail programs expect of an .eml.
#: Lines may run to RFC 5322's hard limit of 998 characters: the standard library otherwise folds a Subject of a
#: little over 78 characters onto a continuation line (a leading space some programs then show) and wraps the
#: text part's table rows in quoted-printable.
EML_POLICY = policy.default.clone(linesep="\r\n", max_line_length=998)


def subject_for(network: Network, result: Result, info: RunInfo) -> str:
    """The Subject: the workbook's name, the status and, with a plan, the total cost.

    >>> from types import SimpleNamespace
    >>> from lanesolve.model.network import Settings, make_network
    >>> from lanesolve.model.result import SolveStatus
    >>> net = make_network([{"id": "D", "supply": 5}], [{"id": "C", "demand": 5}],
    ...                    [{"origin": "D", "destination": "C", "cost_per_unit": 2}], settings=Settings(currency="EUR"))
    >>> subject_for(net, Result(SolveStatus.OPTIMAL, total_cost=10.0), SimpleNamespace(input_path="x/week 12.xlsx"))
    'Lane plan week 12.xlsx: Optimal plan, total cost 10.00 EUR'
    """
    status = summary.STATUS_TEXT.get(result.status, result.status.value)
    text = f"Lane plan {Path(info.input_path).name}: {status}"
    if result.status.has_plan:
        text += f", total cost {summary.format_money(result.total_cost, network.settings.currency or '')}"
    return one_line(text)


def one_line(text: str) -> str:
    """Header text with every line break and run of white space as one space.

    A mail header may not hold a line break (RFC 5322, 2.2: a header field is one logical line), and a file named
    with one -- possible on most file systems -- would otherwise stop the mail from being written.

    >>> one_line("week\\n12.xlsx")
    'week 12.xlsx'
    """
    return " ".join(str(text).split())


def build_email(network: Network, result: Result, info: RunInfo, warnings: list,
                attach: str | os.PathLike | None = None, comparison: pd.DataFrame | None = None,
                extra: dict | None = None) -> EmailMessage:
    """Build the summary mail: HTML with inline PNG charts, a plain-text alternative, the workbook if asked.

    Parameters
    ----------
    network, result, info, warnings
        As for :func:`lanesolve.report.summary.render_html`.
    attach : path-like, optional
        A file to attach, normally the solved workbook (``info.output_path``).
    comparison : DataFrame, optional
        The what-if scenarios beside the baseline (:func:`lanesolve.model.comparison.compare`): the mail shows them
        as the HTML summary does.
    extra : dict, optional
        The plan-changes and carrier sections (:func:`lanesolve.report.carrier_report.summary_extra`).

    Returns
    -------
    email.message.EmailMessage

    Raises
    ------
    WriteError
        The file to attach cannot be read.
    """
    drawings = _charts.summary_charts(network, result)
    cids = {chart.key: make_msgid(idstring=chart.key, domain=CID_DOMAIN) for chart in drawings}
    html = summary.render_html(network, result, info, warnings, charts=drawings,
                              image_src=lambda chart: "cid:" + cids[chart.key][1:-1], comparison=comparison,
                              extra=extra)

    message = EmailMessage(policy=EML_POLICY)
    message["Subject"] = subject_for(network, result, info)
    message["Date"] = formatdate(localtime=True)
    message["X-Unsent"] = "1"
    # Marks the file as lanesolve's, so a later run may replace it without --force (lanesolve.write.paths).
    message[paths.MAIL_HEADER] = __version__
    message.set_content(text.render_text(network, result, info, warnings, comparison))
    message.add_alternative(html, subtype="html")
    html_part = message.get_payload()[1]
    for chart in drawings:
        html_part.add_related(chart.to_png(), maintype="image", subtype="png", cid=cids[chart.key],
                              filename=f"{chart.key}.png", disposition="inline")
    if attach is not None:
        attach = Path(attach)
        try:
            data = attach.read_bytes()
        except OSError as exc:
            raise WriteError(f"Could not read {attach} to attach it to the mail: {exc.strerror or exc} "
                             f"(check that the solved workbook was written)") from exc
        maintype, subtype = WORKBOOK_TYPES.get(attach.suffix.lower(), ("application", "octet-stream"))
        message.add_attachment(data, maintype=maintype, subtype=subtype, filename=one_line(attach.name))
    return message


def write_email(path: str | os.PathLike, network: Network, result: Result, info: RunInfo, warnings: list,
                attach: str | os.PathLike | None = None, comparison: pd.DataFrame | None = None,
                extra: dict | None = None) -> None:
    """Write the summary mail to ``path`` (an ``.eml`` file) atomically.

    Parameters
    ----------
    path : path-like
        Where the mail goes; open it in a mail program, add the recipients and send.
    network, result, info, warnings, attach, comparison, extra
        As for :func:`build_email`.

    Raises
    ------
    WriteError
        The attachment cannot be read, or the file cannot be written (missing folder, no permission).
    """
    path = Path(path)
    data = build_email(network, result, info, warnings, attach, comparison, extra).as_bytes()
    with atomic.replacing(path, "the mail") as handle:
        handle.write(data)
