"""Shared links and files are data only, in real Chromium: no script from them ever runs.

Every payload, if it ran, would set ``window.__pwned`` or open a dialog; the
test fails on either.  It also fails on a Content-Security-Policy violation:
the markup must be shown as text, not become an element that the policy then
happens to block.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any
from urllib.parse import quote, urlencode

import pytest

pytestmark = pytest.mark.browser

READY = "html[data-ready='1']"
#: Would each run a script if the page put it into the document as markup.
PAYLOADS = (
    "<script>window.__pwned='script'</script>",
    '"><img src=x onerror="window.__pwned=\'img\'">',
    "'><svg onload=alert('svg')>",
    "</textarea></script><iframe srcdoc=\"<script>parent.__pwned='iframe'</script>\">",
)
NAME = "Bench " + "".join(PAYLOADS)
#: Records what a payload would leave behind, before any page script runs.
WATCH = """
window.__csp = [];
document.addEventListener('securitypolicyviolation',
    e => window.__csp.push(e.violatedDirective + ' ' + e.blockedURI));
"""


class Watched:
    """A page that records dialogs, page errors and CSP violations."""

    def __init__(self, context: Any, url: str) -> None:
        self.page = context.new_page()
        self.dialogs: list[str] = []
        self.errors: list[str] = []
        self.page.add_init_script(WATCH)
        self.page.on("dialog", self._dialog)
        self.page.on("pageerror", lambda e: self.errors.append(str(e)))
        self.page.goto(url)

    def _dialog(self, dialog: Any) -> None:
        self.dialogs.append(dialog.message)
        dialog.dismiss()

    def assert_nothing_ran(self) -> None:
        self.page.wait_for_timeout(300)  # time for an onerror/onload to fire
        assert self.dialogs == []
        assert self.page.evaluate("window.__pwned") is None
        assert self.page.evaluate("window.__csp") == []
        assert self.errors == []


def _link(base: str, path: str = "/", **fields: str) -> str:
    query = urlencode({"design": "clapp-clock-1M", **fields}, quote_via=quote)
    return f"{base}{path}?{query}&{quote(PAYLOADS[1])}=1"  # and an unknown parameter of markup


def test_markup_in_a_shared_link_never_runs_in_the_sheet(context, live_server):
    sheet = Watched(context, _link(live_server, name=NAME, C2=PAYLOADS[2], R_load=PAYLOADS[0]))
    sheet.page.wait_for_selector(READY)
    page = sheet.page
    assert page.input_value("[name='name']") == NAME
    assert page.input_value("[name='C2']") == PAYLOADS[2]
    assert page.title().startswith("Bench <script>")  # the title shows the text as typed
    notice = page.locator("[data-role='link-problems']")
    assert PAYLOADS[1] in notice.text_content()
    assert page.locator("img[src='x'], svg[onload], iframe[srcdoc]").count() == 0
    # typing more markup goes through the live sheet's own rendering
    page.fill("[name='name']", PAYLOADS[3])
    page.fill("[name='RC']", PAYLOADS[1])
    page.locator("[data-error='RC']").wait_for(state="visible")
    assert "<img src=x onerror=" in page.text_content("[data-error='RC']")  # quoted as text
    sheet.assert_nothing_ran()


def test_markup_never_runs_in_the_summary(context, live_server):
    summary = Watched(context, _link(live_server, "/summary", name=NAME))
    assert summary.page.text_content("h1") == NAME
    assert summary.page.locator("img[src='x'], svg[onload], iframe[srcdoc]").count() == 0
    summary.assert_nothing_ran()


def test_markup_in_an_imported_file_never_runs_and_exports_as_text(
    context, live_server, sample, tmp_path
):
    sample["name"] = NAME
    file = tmp_path / "design.json"
    file.write_text(json.dumps(sample), encoding="utf-8")
    sheet = Watched(context, f"{live_server}/?design=clapp-clock-1M")
    sheet.page.wait_for_selector(READY)
    sheet.page.set_input_files("#import-file", str(file))
    sheet.page.wait_for_function(
        "n => document.querySelector(\"[name='name']\").value === n", arg=NAME
    )
    with sheet.page.expect_download() as download:
        sheet.page.click("#export-link")
    exported = json.loads(Path(download.value.path()).read_text(encoding="utf-8"))
    assert exported["name"] == NAME
    sheet.assert_nothing_ran()
