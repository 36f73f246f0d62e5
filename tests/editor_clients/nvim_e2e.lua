-- End-to-end run of the Neovim client against the real server, loaded by test_editor_e2e.py
-- with `nvim --headless -u NONE`. Environment:
--   CONDHINT_CMD     JSON array: the server command line
--   CONDHINT_FILE    the Python file to open
--   CONDHINT_RESULT  where to write the JSON report
--   CONDHINT_TIMEOUT milliseconds allowed for each wait
-- The report holds the diagnostics, the hover text, the titles of the quick fixes, the buffer
-- after applying the rewrite, and the diagnostics after that; test_editor_e2e.py judges them.

local report = {
  steps = {},
  -- Which way the module starts clients in this Neovim.
  api = type(vim.lsp.start) == "function" and "vim.lsp.start" or "vim.lsp.start_client",
}
local result_path = assert(os.getenv("CONDHINT_RESULT"))
local timeout = tonumber(os.getenv("CONDHINT_TIMEOUT") or "60000")

local function step(name)
  table.insert(report.steps, name)
end

local function lsp_diagnostics(bufnr, code)
  local found = {}
  for _, d in ipairs(vim.diagnostic.get(bufnr)) do
    local lsp = d.user_data and d.user_data.lsp or {}
    local c = d.code or lsp.code
    if code == nil or c == code then
      table.insert(found, { code = c, message = d.message, lnum = d.lnum, col = d.col,
                            end_lnum = d.end_lnum, end_col = d.end_col, lsp = lsp })
    end
  end
  return found
end

local function hover_text(result)
  local contents = result and result.contents
  if type(contents) == "string" then
    return contents
  end
  if type(contents) == "table" and contents.value then
    return contents.value
  end
  local parts = {}
  for _, c in ipairs(contents or {}) do
    table.insert(parts, type(c) == "string" and c or c.value)
  end
  return table.concat(parts, "\n")
end

local function edits_comment_only(action)
  -- An action whose every inserted text is a `# condhint:` comment (ignore / range).
  local changes = action.edit and action.edit.changes or {}
  for _, edits in pairs(changes) do
    for _, e in ipairs(edits) do
      if not e.newText:find("#%s*condhint") then
        return false
      end
    end
  end
  for _, doc_change in ipairs(action.edit and action.edit.documentChanges or {}) do
    for _, e in ipairs(doc_change.edits or {}) do
      if not e.newText:find("#%s*condhint") then
        return false
      end
    end
  end
  return true
end

local function run()
  local cmd = vim.fn.json_decode(assert(os.getenv("CONDHINT_CMD")))
  local file = assert(os.getenv("CONDHINT_FILE"))
  vim.cmd("filetype on")
  local condhint = require("condhint")
  condhint.setup({ cmd = cmd })
  vim.cmd("edit " .. vim.fn.fnameescape(file))
  local bufnr = vim.api.nvim_get_current_buf()
  step("opened")

  local attached = vim.wait(timeout, function() return #condhint.clients() > 0 end, 50)
  assert(attached, "no condhint client attached")
  local client = condhint.clients()[1]
  report.client_count = #condhint.clients()
  step("attached")

  assert(vim.wait(timeout, function() return #lsp_diagnostics(bufnr, "CH101") > 0 end, 50),
    "no CH101 diagnostic within the timeout; got " .. vim.inspect(lsp_diagnostics(bufnr)))
  report.diagnostics = lsp_diagnostics(bufnr)
  local target = lsp_diagnostics(bufnr, "CH101")[1]
  step("diagnostics")

  local position = { line = target.lnum, character = target.col }
  local uri = vim.uri_from_bufnr(bufnr)
  local hover = vim.lsp.buf_request_sync(bufnr, "textDocument/hover",
    { textDocument = { uri = uri }, position = position }, timeout)
  for _, response in pairs(hover or {}) do
    if response.result then
      report.hover = hover_text(response.result)
    end
  end
  step("hover")

  local range = {
    start = { line = target.lnum, character = target.col },
    ["end"] = { line = target.end_lnum, character = target.end_col },
  }
  local params = {
    textDocument = { uri = uri },
    range = range,
    -- Neovim 0.7 keeps only part of the LSP diagnostic in user_data: rebuild the rest.
    context = {
      diagnostics = { vim.tbl_extend("keep", target.lsp, { range = range, message = target.message,
                                                            code = target.code }) },
      only = { "quickfix" },
    },
  }
  local function quick_fixes()
    local actions = {}
    local responses = vim.lsp.buf_request_sync(bufnr, "textDocument/codeAction", params, timeout)
    for _, response in pairs(responses or {}) do
      for _, action in ipairs(response.result or {}) do
        if action.edit == nil and action.data ~= nil then
          -- Neovim 0.7 declares codeAction resolveSupport for `edit`: it may come on resolve.
          local resolved = vim.lsp.buf_request_sync(bufnr, "codeAction/resolve", action, timeout)
          for _, r in pairs(resolved or {}) do
            action = r.result or action
          end
        end
        table.insert(actions, action)
      end
    end
    return actions
  end
  local function rewrite_among(actions)
    -- The rewrite: a quick fix whose edit is not only a `# condhint:` comment.
    for _, action in ipairs(actions) do
      if action.edit and not edits_comment_only(action) then
        return action
      end
    end
  end

  -- The server may still be verifying a rewrite when the diagnostic arrives: ask again,
  -- a few times a second, until one is offered or the timeout runs out.
  local uv = vim.uv or vim.loop
  local deadline = uv.now() + timeout
  local actions, chosen
  repeat
    actions = quick_fixes()
    chosen = rewrite_among(actions)
    if not chosen then
      vim.wait(250, function() return false end, 50)
    end
  until chosen or uv.now() > deadline
  report.actions = {}
  for _, a in ipairs(actions) do
    table.insert(report.actions, a.title)
  end
  step("code actions")
  assert(chosen, "no rewrite among the quick fixes: " .. vim.inspect(report.actions))
  report.applied = chosen.title
  vim.lsp.util.apply_workspace_edit(chosen.edit, client.offset_encoding)
  report.text_after = table.concat(vim.api.nvim_buf_get_lines(bufnr, 0, -1, false), "\n") .. "\n"
  step("applied")

  -- After the edit the server analyses the new text: the CH101 finding must go away.
  report.cleared = vim.wait(timeout, function() return #lsp_diagnostics(bufnr, "CH101") == 0 end, 50)
  report.diagnostics_after = lsp_diagnostics(bufnr)
  step("re-analysed")

  -- A second file under the same root is served by the same client.
  local second = os.getenv("CONDHINT_SECOND_FILE")
  if second then
    vim.cmd("edit " .. vim.fn.fnameescape(second))
    local other = vim.api.nvim_get_current_buf()
    local function attached_to_other()
      for _, c in ipairs(condhint.clients()) do
        if c.attached_buffers and c.attached_buffers[other] then
          return true
        end
      end
      return false
    end
    report.second_attached = vim.wait(timeout, attached_to_other, 50)
    report.client_count_after_second = #condhint.clients()
    step("second file")

    -- :CondhintRestart replaces the client and re-attaches both buffers to the new one.
    local old_id = condhint.clients()[1].id
    vim.cmd("CondhintRestart")
    local function restarted()
      local clients = condhint.clients()
      return #clients == 1 and clients[1].id ~= old_id and clients[1].attached_buffers[bufnr]
        and clients[1].attached_buffers[other]
    end
    report.restarted = vim.wait(timeout, restarted, 50)
    step("restarted")
  end
end

local ok, err = pcall(run)
report.ok = ok
if not ok then
  report.error = tostring(err)
end
local out = assert(io.open(result_path, "w"))
out:write(vim.fn.json_encode(report))
out:close()
vim.cmd(ok and "qa!" or "cq 1")
