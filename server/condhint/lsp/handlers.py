"""Thin LSP handlers: fetch the document, call the core, convert the result (registered in `server`)."""
from __future__ import annotations

import asyncio
import logging
import os
from pathlib import Path
from typing import TYPE_CHECKING, Any

from lsprotocol import types
from pygls.capabilities import get_capability
from pygls.uris import from_fs_path, to_fs_path

from condhint.hover import analyse_node, describe, markdown
from condhint.lsp import actions
from condhint.fixing import rewrites
from condhint.lsp.convert import (Positions, result_id, to_lsp_hover, to_lsp_inlay_hint, to_lsp_text_edit,
                                  to_lsp_workspace_edit)
from condhint.lsp.settings import SECTION, resolve, section_of
from condhint.lsp.state import DocumentState, relative_to
from condhint.lsp.transport import watch_client

if TYPE_CHECKING:
    from condhint.lsp.server import CondhintServer

log = logging.getLogger(__name__)

HOVER_WAIT = 5.0  # seconds a hover waits for the analysis of the current text
FORMULA_WAIT = 1.0  # seconds a hover waits for a κ formula that is not ready (else it says so; shown on the next hover)
CONFIG_WAIT = 5.0


# ---- lifecycle and settings ---------------------------------------------------------------------------------
def initialize(ls: "CondhintServer", params: types.InitializeParams) -> None:
    ls.init_options = params.initialization_options
    watch_client(params.process_id)
    root = params.workspace_folders[0].uri if params.workspace_folders else params.root_uri
    path = to_fs_path(root) if root else params.root_path
    ls.root = Path(path) if path else None
    ls.pull = get_capability(params.capabilities, "text_document.diagnostic", None) is not None
    ls.settings = resolve(ls.root, ls.init_options)


async def initialized(ls: "CondhintServer", params: types.InitializedParams) -> None:
    ls.loop = asyncio.get_running_loop()
    if ls.settings.config.kappa_formula:
        ls.background.warm_up()
    await refresh_settings(ls)


async def refresh_settings(ls: "CondhintServer", pushed: Any = None) -> None:
    """Re-read the settings (pushed with didChangeConfiguration, else asked with workspace/configuration)
    and re-analyse every open document."""
    workspace = pushed
    if workspace is None and not ls.client_has("workspace.configuration"):
        workspace = ls.workspace_settings  # settings pushed earlier with didChangeConfiguration, if any
    elif workspace is None:
        scope = from_fs_path(str(ls.root)) if ls.root else None
        try:
            answer = await asyncio.wait_for(ls.workspace_configuration_async(types.ConfigurationParams(
                items=[types.ConfigurationItem(section=SECTION, scope_uri=scope)])), CONFIG_WAIT)
            workspace = answer[0] if answer else None
        except Exception as exc:  # noqa: BLE001 - clients that cannot answer keep the other settings
            log.info("workspace/configuration not answered: %r", exc)
    before = ls.settings
    ls.workspace_settings = workspace
    ls.settings = resolve(ls.root, ls.init_options, workspace)
    message = ls.settings.message()
    if message and message != ls.last_message:
        ls.tell(message)  # one message per distinct set of problems, not one per re-read
    ls.last_message = message
    if ls.settings.config.kappa_formula and not before.config.kappa_formula:
        ls.background.warm_up()
    if ls.settings == before:
        return
    reanalyse(ls)


def reanalyse(ls: "CondhintServer") -> None:
    for state in ls.docs:
        state.invalidate()
        ls.analyser.schedule(state, 0.0)
    if ls.pull and ls.client_has("workspace.diagnostics.refresh_support"):
        ls.workspace_diagnostic_refresh(None)
    if ls.client_has("workspace.inlay_hint.refresh_support"):
        ls.workspace_inlay_hint_refresh(None)


async def did_change_configuration(ls: "CondhintServer", params: types.DidChangeConfigurationParams) -> None:
    pushed = params.settings if isinstance(params.settings, dict) and SECTION in params.settings else None
    if pushed is not None:
        pushed = section_of(pushed, "didChangeConfiguration", [])
    before = ls.settings
    await refresh_settings(ls, pushed)
    if ls.settings == before:
        reanalyse(ls)  # pyproject.toml may be unchanged too: the client asked for fresh results anyway


def shutdown(ls: "CondhintServer", params: Any = None) -> None:
    ls.shut_down = True
    ls.loop = None  # no more log forwarding
    ls.background.shutdown()
    ls.analyser.shutdown()


def exit_now(ls: "CondhintServer", params: Any = None) -> None:
    """The client's `exit`: end the process at once. Every reply has been written and flushed already;
    tearing down the interpreter (numpy, mpmath, sympy, idle threads) would only keep the editor waiting."""
    logging.shutdown()
    os._exit(0 if ls.shut_down else 1)


# ---- documents ----------------------------------------------------------------------------------------------
def _is_python(item: types.TextDocumentItem) -> bool:
    return item.language_id == "python" or item.uri.endswith((".py", ".pyi"))


def did_open(ls: "CondhintServer", params: types.DidOpenTextDocumentParams) -> None:
    item = params.text_document
    if not _is_python(item):
        return
    state = ls.docs.open(item.uri, ls.path_of(item.uri), item.version, item.text)
    ls.analyser.schedule(state, 0.0)


def did_change(ls: "CondhintServer", params: types.DidChangeTextDocumentParams) -> None:
    state = ls.docs.get(params.text_document.uri)
    if state is None:
        return
    state.update(ls.workspace.get_text_document(state.uri).source, params.text_document.version)
    ls.analyser.schedule(state)


def did_save(ls: "CondhintServer", params: types.DidSaveTextDocumentParams) -> None:
    state = ls.docs.get(params.text_document.uri)
    if state is not None:
        ls.analyser.schedule(state)


def did_close(ls: "CondhintServer", params: types.DidCloseTextDocumentParams) -> None:
    if ls.docs.close(params.text_document.uri) is not None and not ls.pull:
        ls.analyser.clear(params.text_document.uri)


def _cfg(ls: "CondhintServer", state: DocumentState):  # noqa: ANN202 - condhint.config.Config
    return ls.settings.analysis_config.for_path(relative_to(state.path, ls.root))


# ---- diagnostics (pull) ------------------------------------------------------------------------------------
async def pull_diagnostics(ls: "CondhintServer", params: types.DocumentDiagnosticParams
                           ) -> types.DocumentDiagnosticReport:
    state = ls.docs.get(params.text_document.uri)
    result = await ls.analyser.result(state, 60.0) if state is not None else None
    if state is None or result is None:
        return types.RelatedFullDocumentDiagnosticReport(items=[])
    items = ls.analyser.diagnostics(state)
    rid = result_id(items)
    if params.previous_result_id == rid:
        return types.RelatedUnchangedDocumentDiagnosticReport(result_id=rid)
    return types.RelatedFullDocumentDiagnosticReport(items=items, result_id=rid)


# ---- hover -------------------------------------------------------------------------------------------------
async def hover(ls: "CondhintServer", params: types.HoverParams) -> types.Hover | None:
    state = ls.docs.get(params.text_document.uri)
    result = await ls.analyser.result(state, HOVER_WAIT) if state is not None else None
    if state is None or result is None:
        return None
    pos = Positions(state.lines, ls.codec)
    hit = result.node_at(*pos.from_client(params.position))
    if hit is None:
        return None
    site, node = hit
    cfg = _cfg(ls, state)
    analysis = result.analysis_of(site) if node is site.root else None
    if analysis is None:
        loop = asyncio.get_running_loop()
        analysis = await loop.run_in_executor(ls.background.hover_pool, analyse_node, site, node, cfg,
                                              ls.background.hover_cache)
    own = [f for f in result.findings if result.site_of(f) is site]
    finding = next((f for f in own if f.span == node.span), None)
    around = next((f for f in own if f.span.contains(node.span)), None) if finding is None else None
    facts = describe(site, node, analysis, cfg, finding or around)
    facts.finding_around = around is not None
    if ls.settings.config.kappa_formula:
        facts.formula_state, facts.formula = await _formula(ls, site, node, cfg)
    return to_lsp_hover(markdown(facts), node.span, pos, ls.markdown_hover)


async def _formula(ls: "CondhintServer", site, node, cfg) -> tuple[str, str | None]:  # noqa: ANN001
    ready, text = ls.background.formula(site, node)
    if not ready:
        fut = ls.background.want_formula(site, node, cfg)
        try:
            text = await asyncio.wait_for(asyncio.shield(fut), FORMULA_WAIT)
            ready = True
        except asyncio.TimeoutError:
            return "pending", None
    return ("ready", text) if text else ("unavailable", None)


# ---- inlay hints -------------------------------------------------------------------------------------------
async def inlay_hints(ls: "CondhintServer", params: types.InlayHintParams) -> list[types.InlayHint]:
    if not ls.settings.inlay_hints:
        return []
    state = ls.docs.get(params.text_document.uri)
    result = await ls.analyser.result(state, HOVER_WAIT) if state is not None else None
    if state is None or result is None:
        return []
    pos = Positions(state.lines, ls.codec)
    start, end = pos.from_client(params.range.start), pos.from_client(params.range.end)
    return [to_lsp_inlay_hint(f, pos) for f in result.findings
            if f.code != "CH001" and actions.overlaps(f.span, start, end)]


# ---- code actions ------------------------------------------------------------------------------------------
async def code_actions(ls: "CondhintServer", params: types.CodeActionParams) -> list[types.CodeAction] | None:
    state = ls.docs.get(params.text_document.uri)
    result = await ls.analyser.result(state, HOVER_WAIT) if state is not None else None
    if state is None or result is None:
        return None
    pos = Positions(state.lines, ls.codec)
    start, end = pos.from_client(params.range.start), pos.from_client(params.range.end)
    only = list(params.context.only) if params.context.only else None
    fingerprints = {d.data.get("fingerprint") for d in params.context.diagnostics
                    if d.source == "condhint" and isinstance(d.data, dict)}
    findings = actions.findings_in(result, start, end, fingerprints)
    cfg = _cfg(ls, state)
    plans: list[actions.Plan] = []
    searching: list = []
    fixing = ls.settings.config.fixes and rewrites() is not None
    if fixing and actions.wanted(actions.QUICKFIX, only):
        for f in findings:
            fixes = await _fixes(ls, result, f, cfg)
            if fixes is None:
                searching.append(f)
            else:
                plans += actions.fix_plans(state.text, f, fixes)
    if fixing and actions.wanted(actions.FIX_ALL, only):
        await _searches_done(ls, result, cfg)
        chosen, pending = [], []
        for f in result.findings:
            ready, fixes = ls.background.fixes_of(f)
            if not ready:
                pending.append(f)
            elif fixes:
                chosen.append((f, fixes[0]))
        plan = actions.fix_all_plan(state.text, chosen, len(pending))
        if plan is None:
            searching += [f for f in pending if f not in searching]
        if plan is not None:
            plans.append(plan)
    if actions.wanted(actions.QUICKFIX, only) or actions.wanted(actions.REFACTOR, only):
        plans += [p for p in actions.comment_plans(state.lines, result, findings, start)
                  if actions.wanted(p.kind, only)]
    state.plans = {p.id: p for p in plans}
    diagnostics = dict(zip((f.fingerprint() for f in result.findings), ls.analyser.diagnostics(state)))
    lazy = ls.resolve_edits
    out = []
    for p in plans:
        action = types.CodeAction(title=p.title, kind=p.kind, is_preferred=p.preferred or None,
                                  diagnostics=[diagnostics[f.fingerprint()] for f in p.findings
                                               if f.fingerprint() in diagnostics] or None)
        if lazy and not p.id.startswith(("ignore:", "range:")):
            action.data = {"uri": state.uri, "id": p.id, "generation": state.generation}
        else:
            action.edit = _edit(ls, state, p)
        out.append(action)
    kind = actions.QUICKFIX if actions.wanted(actions.QUICKFIX, only) else actions.FIX_ALL
    out += _still_searching(ls, searching, diagnostics, kind)
    return out


def _still_searching(ls: "CondhintServer", findings: list, diagnostics: dict, kind: str) -> list[types.CodeAction]:
    """A fix whose search has not finished is never silently missing: clients that show disabled actions get
    one saying so; the others get a message. Asking again offers the fix once it is verified."""
    if not findings:
        return []
    title = "condhint: still searching for a verified fix (ask again in a moment)"
    if ls.client_has("text_document.code_action.disabled_support"):
        return [types.CodeAction(title=title, kind=kind,
                                 diagnostics=[diagnostics[f.fingerprint()] for f in findings
                                              if f.fingerprint() in diagnostics] or None,
                                 disabled=types.CodeActionDisabled(reason="the search is still running"))]
    ls.window_show_message(types.ShowMessageParams(type=types.MessageType.Info, message=title))
    return []


async def _searches_done(ls: "CondhintServer", result, cfg) -> None:  # noqa: ANN001
    """Wait up to `fix_wait_ms`, in all, for the fix searches of the document's findings (for fix-all)."""
    waiting = [ls.background.want_fixes(f, result, cfg) for f in result.findings if not ls.background.fixes_of(f)[0]]
    if waiting:
        await asyncio.wait([asyncio.shield(w) for w in waiting], timeout=cfg.fix_wait_ms / 1000.0)


async def _fixes(ls: "CondhintServer", result, finding, cfg) -> list | None:  # noqa: ANN001
    """The finding's verified fixes, waiting up to `fix_wait_ms` for their search; None while it still runs."""
    ready, fixes = ls.background.fixes_of(finding)
    if ready:
        return fixes
    try:
        await asyncio.wait_for(asyncio.shield(ls.background.want_fixes(finding, result, cfg)),
                               cfg.fix_wait_ms / 1000.0)
    except asyncio.TimeoutError:
        return None
    return ls.background.fixes_of(finding)[1]


def _edit(ls: "CondhintServer", state: DocumentState, plan: actions.Plan) -> types.WorkspaceEdit:
    pos = Positions(state.lines, ls.codec)
    snippets = ls.document_changes and ls.snippet_edits
    edits = [to_lsp_text_edit(r, pos, snippets) for r in plan.edits()]
    return to_lsp_workspace_edit(state.uri, state.version, edits, ls.document_changes)


def resolve_code_action(ls: "CondhintServer", action: types.CodeAction) -> types.CodeAction:
    data = action.data if isinstance(action.data, dict) else {}
    state = ls.docs.get(str(data.get("uri", "")))
    if state is None or data.get("generation") != state.generation:
        return action  # the document changed since: no edit (the client asks again)
    plan = state.plans.get(str(data.get("id")))
    if plan is not None:
        action.edit = _edit(ls, state, plan)
    return action


# ---- commands ----------------------------------------------------------------------------------------------
def statistics(ls, uri: str) -> dict[str, Any]:  # noqa: ANN001 - pygls resolves command annotations at run time
    """How the last analysis of a document went (units analysed and reused, expressions analysed)."""
    state = ls.docs.get(uri)
    if state is None or state.result is None:
        return {}
    r = state.result
    return {"version": state.result_doc_version, "findings": len(r.findings), "pieces": len(r.units),
            "analysed": r.analysed, "reused": r.reused, "expressions_analysed": r.site_misses,
            "seconds": round(r.seconds, 4), "status": r.status}
