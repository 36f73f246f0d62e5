-- A headless Neovim session against the real condhint server, run by test_neovim.py as
--   nvim --headless -u NONE -i NONE -n -c 'luafile neovim_session.lua' FILE.py
-- Environment:
--   CONDHINT_CMD      JSON array: the server command line
--   CONDHINT_CLIENTS  folder holding editor_clients/neovim/lua (the project's client module), optional
--   CONDHINT_REPORT   where to write the JSON report
--   CONDHINT_WAIT     milliseconds allowed for each wait
-- Steps: attach the server, wait for diagnostics, hover the first avoidable loss, apply its quick fix
-- (a verified rewrite, else the ignore comment), write the buffer, wait for the updated diagnostics.

local report = { steps = {} }
local report_path = assert(os.getenv("CONDHINT_REPORT"), "CONDHINT_REPORT is not set")
local wait = tonumber(os.getenv("CONDHINT_WAIT") or "60000")

local function finish(ok, why)
  report.ok = ok
  report.error = why
  local f = assert(io.open(report_path, "w"))
  f:write(vim.fn.json_encode(report))
  f:close()
  if ok then
    vim.cmd("qa!")
  else
    vim.cmd("cq 1")
  end
end

local function step(name)
  table.insert(report.steps, name)
end

local function fail(why)
  finish(false, why)
  error(why)
end

local function codes(bufnr)
  local out = {}
  for _, d in ipairs(vim.diagnostic.get(bufnr)) do
    table.insert(out, { code = d.code, lnum = d.lnum, col = d.col, message = d.message })
  end
  table.sort(out, function(a, b) return a.lnum < b.lnum end)
  return out
end

local ok_run, err = pcall(function()
  local bufnr = vim.api.nvim_get_current_buf()
  vim.bo[bufnr].filetype = "python" -- -u NONE: no filetype detection
  local cmd = vim.fn.json_decode(assert(os.getenv("CONDHINT_CMD")))
  local settings = { debounceMs = 20 }
  local client_id
  local clients = os.getenv("CONDHINT_CLIENTS")
  if clients and vim.loop.fs_stat(clients .. "/neovim/lua/condhint/init.lua") then
    package.path = clients .. "/neovim/lua/?/init.lua;" .. clients .. "/neovim/lua/?.lua;" .. package.path
    local condhint = require("condhint")
    condhint.setup({ cmd = cmd, settings = settings })
    client_id = condhint.attach(bufnr)
    report.attached_with = "editor_clients/neovim"
  else
    local root = vim.fn.fnamemodify(vim.api.nvim_buf_get_name(bufnr), ":p:h")
    client_id = vim.lsp.start_client({ name = "condhint", cmd = cmd, root_dir = root,
                                       settings = { condhint = settings }, init_options = { condhint = settings } })
    vim.lsp.buf_attach_client(bufnr, client_id)
    report.attached_with = "vim.lsp.start_client"
  end
  if not client_id then
    fail("the server did not start")
  end
  step("attached")

  if not vim.wait(wait, function() return #vim.diagnostic.get(bufnr) > 0 end, 50) then
    fail("no diagnostics within " .. wait .. " ms")
  end
  report.before = codes(bufnr)
  step("diagnostics")

  local client = vim.lsp.get_client_by_id(client_id)
  report.offset_encoding = client.offset_encoding
  local target
  for _, d in ipairs(vim.diagnostic.get(bufnr)) do
    if d.code == "CH101" and (target == nil or d.lnum < target.lnum) then
      target = d
    end
  end
  if target == nil then
    fail("no CH101 among the diagnostics")
  end
  -- The cursor on the middle of the flagged range: on the operation itself (its operator).
  local col = target.col
  if target.end_lnum == target.lnum then
    col = math.floor((target.col + target.end_col) / 2)
  end
  vim.api.nvim_win_set_cursor(0, { target.lnum + 1, col })

  local params = vim.lsp.util.make_position_params(0, client.offset_encoding)
  local answers = vim.lsp.buf_request_sync(bufnr, "textDocument/hover", params, wait)
  local hover = answers and answers[client_id] and answers[client_id].result
  if not hover then
    fail("no hover")
  end
  report.hover = hover.contents.value or hover.contents
  step("hover")

  local range = vim.lsp.util.make_range_params(0, client.offset_encoding)
  range.context = { diagnostics = {}, only = { "quickfix" } }
  answers = vim.lsp.buf_request_sync(bufnr, "textDocument/codeAction", range, wait)
  local actions = answers and answers[client_id] and answers[client_id].result or {}
  report.titles = {}
  local chosen
  for _, a in ipairs(actions) do
    table.insert(report.titles, a.title)
    if chosen == nil and a.isPreferred then -- the best verified rewrite
      chosen = a
    end
  end
  if chosen == nil then
    for _, a in ipairs(actions) do
      if a.title:find("ignore%[CH101%]") then
        chosen = a
      end
    end
  end
  if chosen == nil then
    fail("no quick fix offered")
  end
  if chosen.edit == nil then
    answers = vim.lsp.buf_request_sync(bufnr, "codeAction/resolve", chosen, wait)
    chosen = answers and answers[client_id] and answers[client_id].result or chosen
  end
  if chosen.edit == nil then
    fail("the quick fix has no edit")
  end
  report.applied = chosen.title
  vim.lsp.util.apply_workspace_edit(chosen.edit, client.offset_encoding)
  step("applied")

  vim.cmd("write")
  step("written")
  local function fixed()
    for _, d in ipairs(vim.diagnostic.get(bufnr)) do
      if d.code == "CH101" and d.lnum == target.lnum then
        return false
      end
    end
    return true
  end
  if not vim.wait(wait, fixed, 50) then
    fail("the diagnostics did not update after the fix")
  end
  report.after = codes(bufnr)
  step("updated")
end)

if ok_run then
  finish(true, nil)
elseif report.ok == nil then
  finish(false, tostring(err))
end
