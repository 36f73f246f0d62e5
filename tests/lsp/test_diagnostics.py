"""Diagnostics end to end: a real server over stdio, real client capability profiles."""
from __future__ import annotations

from pathlib import Path

import pytest
from lsprotocol import types

from lsp_support import (NEOVIM, NEOVIM_07, VSCODE, encoding_of, expect_diagnostics, open_document, range_of,
                         replace_all, within)
from lsp_samples import GROWTH, digits_lost_exp_minus_one

pytestmark = pytest.mark.asyncio
DEMO = Path(__file__).resolve().parents[2] / "docs" / "examples" / "marram"


def by_code(diags: list[types.Diagnostic], code: str) -> list[types.Diagnostic]:
    return [d for d in diags if d.code == code]


@pytest.mark.parametrize("profile", [VSCODE, NEOVIM_07])
async def test_push_flags_the_avoidable_loss_and_not_the_stable_control(lsp, tmp_path, profile):
    client = await lsp(profile, init_options={"condhint": {"debounceMs": 10}})
    path = tmp_path / "growth.py"
    uri = path.resolve().as_uri()
    published = expect_diagnostics(client, uri, version=1)
    open_document(client, path, GROWTH)
    params = await within(published)
    enc = encoding_of(client)
    assert enc == "utf-16"  # neither profile offers UTF-8
    diags = params.diagnostics
    flagged = [d for d in diags if d.range == range_of(GROWTH, "exp(rate * dt) - 1", enc)]
    assert len(flagged) == 1, diags
    d = flagged[0]
    assert d.code == "CH101" and d.source == "condhint"
    # exp(x) - 1 at x = rate*dt = 1e-12 loses about 12 digits in binary64 (mpmath reference): an error.
    assert digits_lost_exp_minus_one(1e-12) >= 8
    assert d.severity == types.DiagnosticSeverity.Error
    assert d.message.split(". ")[0].startswith("Loses ") and "avoidable" in d.message.split(". ")[0]
    for part in ("κ ≈", "measured", "predicted", "category formula"):
        assert part in d.message
    # The stable control: a sum of positive products has κ = 1 (Higham 2002, summation); nothing to report.
    control = range_of(GROWTH, "n_small * v_small + n_large * v_large", enc)
    assert not [x for x in diags if control.start.line <= x.range.start.line <= control.end.line]
    # log(1 + f) for tiny f (Goldberg 1991) and the inherent sensitivity of ratio - 1 near 1 are reported too.
    assert [x.code for x in diags if x.range.start.line == range_of(GROWTH, "math.log(1 + fraction)", enc).start.line] \
        == ["CH101"]
    assert by_code(diags, "CH201")


async def test_pull_diagnostics_and_unchanged_on_repeat(lsp, tmp_path):
    client = await lsp(NEOVIM)
    assert client.init_result.capabilities.diagnostic_provider is not None
    path = tmp_path / "growth.py"
    uri = open_document(client, path, GROWTH)
    doc = types.TextDocumentIdentifier(uri=uri)
    first = await within(client.text_document_diagnostic_async(types.DocumentDiagnosticParams(text_document=doc)))
    assert first.kind == "full" and first.result_id
    assert [d.code for d in first.items].count("CH101") == 2
    again = await within(client.text_document_diagnostic_async(
        types.DocumentDiagnosticParams(text_document=doc, previous_result_id=first.result_id)))
    assert again.kind == "unchanged" and again.result_id == first.result_id
    # An edit that changes the findings gives a new full report.
    replace_all(client, uri, GROWTH.replace("return exp(rate * dt) - 1", "return math.expm1(rate * dt)"), 2)
    third = await within(client.text_document_diagnostic_async(
        types.DocumentDiagnosticParams(text_document=doc, previous_result_id=first.result_id)))
    assert third.kind == "full" and third.result_id != first.result_id
    assert [d.code for d in third.items].count("CH101") == 1
    # Pull clients are not pushed to.
    assert not client.recorder.seen.get(types.TEXT_DOCUMENT_PUBLISH_DIAGNOSTICS)


async def test_push_clients_get_no_pull_capability_and_close_clears(lsp, tmp_path):
    client = await lsp(VSCODE, init_options={"debounceMs": 10})
    assert client.init_result.capabilities.diagnostic_provider is None
    path = tmp_path / "growth.py"
    uri = path.resolve().as_uri()
    first = expect_diagnostics(client, uri, version=1)
    open_document(client, path, GROWTH)
    assert (await within(first)).diagnostics
    cleared = expect_diagnostics(client, uri)
    client.text_document_did_close(types.DidCloseTextDocumentParams(text_document=types.TextDocumentIdentifier(uri=uri)))
    assert list((await within(cleared)).diagnostics) == []


async def test_related_information_for_a_formula_over_several_lines(lsp, tmp_path):
    # The demo's quadratic formula: `disc` (line 14) is inlined into line 15's `-b + math.sqrt(disc)`.
    text = (DEMO / "chemistry.py").read_text()
    client = await lsp(VSCODE, init_options={"debounceMs": 10})  # declares relatedInformation
    path = tmp_path / "chemistry.py"
    uri = path.resolve().as_uri()
    done = expect_diagnostics(client, uri, version=1)
    open_document(client, path, text)
    diags = (await within(done)).diagnostics
    flagged = [d for d in diags if d.range == range_of(text, "-b + math.sqrt(disc)", "utf-16")]
    assert len(flagged) == 1 and flagged[0].code == "CH101"
    related = {(r.location.range.start.line, r.message) for r in flagged[0].related_information}
    disc_line = range_of(text, "disc = b * b", "utf-16").start.line
    assert (disc_line, "`disc` is computed here") in related
    assert all(r.location.uri == uri for r in flagged[0].related_information)
