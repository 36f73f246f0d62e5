-- Loaded by test_neovim.py with `nvim --headless -u NONE`; the runtimepath holds
-- editor_clients/neovim. Checks what setup{} registers without starting a server.
-- Writes "ok" or the failure to the file named by $CONDHINT_RESULT, then quits.

local result_path = assert(os.getenv("CONDHINT_RESULT"), "CONDHINT_RESULT not set")
local project = assert(os.getenv("CONDHINT_PROJECT"), "CONDHINT_PROJECT not set")

local function check()
  -- Collect what Neovim reports (spawn failures, deprecations) instead of printing it.
  local notified = {}
  vim.notify = function(msg) table.insert(notified, msg) end
  local condhint = require("condhint")
  condhint.setup({ cmd = { "condhint-not-started", "serve" }, settings = { samples = 32, inlayHints = true } })

  -- One FileType autocommand, in our group, for the python filetype.
  local autocmds = vim.api.nvim_get_autocmds({ group = "condhint", event = "FileType" })
  assert(#autocmds == 1, "expected 1 FileType autocmd, got " .. #autocmds)
  assert(autocmds[1].pattern == "python", "autocmd pattern is " .. tostring(autocmds[1].pattern))
  assert(vim.fn.exists(":CondhintRestart") == 2, "no :CondhintRestart command")

  -- setup{} again replaces the group rather than adding a second autocommand.
  condhint.setup({ cmd = { "condhint-not-started", "serve" }, filetypes = { "python", "pyrex" } })
  autocmds = vim.api.nvim_get_autocmds({ group = "condhint", event = "FileType" })
  local patterns = {}
  for _, a in ipairs(autocmds) do
    table.insert(patterns, a.pattern)
  end
  table.sort(patterns)
  assert(table.concat(patterns, ",") == "pyrex,python", "patterns: " .. table.concat(patterns, ","))

  -- A user's cmd replaces the default whole (no index-wise merge).
  condhint.setup({ cmd = { "/opt/bin/condhint-x" }, settings = { samples = 32 } })
  local config = condhint.client_config(project)
  assert(#config.cmd == 1 and config.cmd[1] == "/opt/bin/condhint-x", vim.inspect(config.cmd))
  assert(config.settings.condhint.samples == 32, vim.inspect(config.settings))
  assert(config.init_options.condhint.samples == 32, vim.inspect(config.init_options))
  assert(config.root_dir == project)
  -- Empty tables go out as JSON objects, never as the empty array Neovim would send.
  condhint.setup({ cmd = { "x" }, settings = {} })
  local encoded = vim.fn.json_encode(condhint.client_config(project).settings)
  assert(encoded == '{"condhint": {}}' or encoded == '{"condhint":{}}', encoded)
  condhint.setup({ cmd = { "x" }, settings = { thresholds = {}, defaultRange = { 1, 2 } } })
  local decoded = vim.fn.json_decode(vim.fn.json_encode(condhint.client_config(project).init_options))
  assert(vim.fn.json_encode(decoded.condhint.thresholds):match("^{%s*}$"), vim.fn.json_encode(decoded))
  assert(decoded.condhint.defaultRange[2] == 2)
  assert(config.name == "condhint")

  -- Root: the nearest folder with pyproject.toml, from a file two levels down.
  vim.cmd("edit " .. vim.fn.fnameescape(project .. "/pkg/sub/mod.txt"))
  assert(condhint.find_root(0) == project, "root " .. condhint.find_root(0))
  -- Without any marker the buffer's own folder is the root.
  assert(condhint.find_root(0, { "no-such-marker" }) == project .. "/pkg/sub")

  -- Opening a Python file fires the autocommand; a server that cannot be spawned is
  -- reported by Neovim, not raised, and leaves no client behind.
  vim.cmd("filetype on")
  condhint.setup({ cmd = { "condhint-no-such-program", "serve" } })
  vim.cmd("edit " .. vim.fn.fnameescape(project .. "/pkg/sub/calc.py"))
  assert(vim.bo.filetype == "python", "filetype " .. vim.bo.filetype)
  assert(#condhint.clients() == 0, "a client is running")
  assert(#notified >= 1 and notified[#notified]:find("condhint%-no%-such%-program"), vim.inspect(notified))

  -- Bad options are refused with a message naming the option.
  local ok, err = pcall(condhint.setup, { cmd = "condhint serve" })
  assert(not ok and tostring(err):find("cmd"), tostring(err))
  ok, err = pcall(condhint.setup, { setings = {} })
  assert(not ok and tostring(err):find("setings"), tostring(err))
  ok, err = pcall(condhint.setup, { cmd = {} })
  assert(not ok, "empty cmd accepted")

  -- Nothing we called is deprecated in this Neovim version.
  local messages = vim.fn.execute("messages")
  assert(not messages:lower():find("deprecat"), messages)
  for _, msg in ipairs(notified) do
    assert(not msg:lower():find("deprecat"), msg)
  end
end

local ok, err = pcall(check)
local out = assert(io.open(result_path, "w"))
out:write(ok and "ok" or ("FAIL: " .. tostring(err)))
out:close()
vim.cmd(ok and "qa!" or "cq 1")
