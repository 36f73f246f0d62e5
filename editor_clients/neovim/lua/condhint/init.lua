-- condhint client for Neovim: starts the condhint language server and attaches it to Python
-- buffers. Works on Neovim 0.7 (vim.lsp.start_client + vim.lsp.buf_attach_client, one client
-- per project root) and on current Neovim (vim.lsp.start, which reuses clients itself).
--
--   require("condhint").setup{
--     cmd = { "condhint", "serve" },              -- command line of the server
--     settings = { thresholds = { warning = 3 } }, -- the server's `condhint` settings
--     filetypes = { "python" },
--   }

local M = {}

local GROUP = "condhint"
local uv = vim.uv or vim.loop

--- Options used when setup{} does not give them.
M.defaults = {
  name = "condhint",
  cmd = { "condhint", "serve" },
  filetypes = { "python" },
  -- Contents of the server's settings section `condhint` (camelCase or snake_case keys).
  settings = {},
  -- Files or folders whose presence marks a project root; first match walking upwards.
  root_markers = { "pyproject.toml", "setup.cfg", "setup.py", ".git" },
  on_attach = nil,
  capabilities = nil,
}

--- Options in force after setup{}.
M.options = nil

--- Client ids by root folder (used only where vim.lsp.start is missing).
local clients_by_root = {}

local function copy_options(opts)
  local merged = {}
  for key, value in pairs(M.defaults) do
    merged[key] = value
  end
  for key, value in pairs(opts or {}) do
    -- Whole values replace the defaults: merging lists index by index would splice a
    -- user's cmd into the default one.
    merged[key] = value
  end
  return merged
end

-- Expected type of each option; optional ones may also be nil. (vim.validate changed its
-- signature across Neovim versions, so the check is done here.)
local OPTION_TYPES = {
  name = { "string" },
  cmd = { "table" },
  filetypes = { "table" },
  settings = { "table" },
  root_markers = { "table" },
  on_attach = { "function", "nil" },
  capabilities = { "table", "nil" },
}

local function validate(opts)
  for key, allowed in pairs(OPTION_TYPES) do
    if not vim.tbl_contains(allowed, type(opts[key])) then
      error(string.format("condhint: option %s must be a %s, not a %s", key, allowed[1], type(opts[key])), 3)
    end
  end
  for key in pairs(opts) do
    if OPTION_TYPES[key] == nil then
      error(string.format("condhint: unknown option %s", key), 3)
    end
  end
  if #opts.cmd == 0 then
    error("condhint: cmd must name a program, e.g. { 'condhint', 'serve' }", 3)
  end
end

local function is_dir_or_file(path)
  return uv.fs_stat(path) ~= nil
end

--- Project root of a buffer: the nearest folder upwards holding one of the root markers,
--- else the buffer's own folder, else the current directory.
function M.find_root(bufnr, markers)
  markers = markers or (M.options or M.defaults).root_markers
  local name = vim.api.nvim_buf_get_name(bufnr or 0)
  if name == "" then
    return uv.cwd()
  end
  local start = vim.fn.fnamemodify(name, ":p:h")
  local dir = start
  while true do
    for _, marker in ipairs(markers) do
      if is_dir_or_file(dir .. "/" .. marker) then
        return dir
      end
    end
    local parent = vim.fn.fnamemodify(dir, ":h")
    if parent == dir then
      return start
    end
    dir = parent
  end
end

local function enable_inlay_hints(bufnr)
  local hints = vim.lsp.inlay_hint
  if type(hints) == "table" and type(hints.enable) == "function" then
    -- Neovim 0.10 and later; older versions have no inlay hints.
    pcall(hints.enable, true, { bufnr = bufnr })
  end
end

local function inlay_hints_wanted(settings)
  return settings.inlayHints == true or settings.inlay_hints == true
end

--- A copy of `value` in which every empty table is an empty JSON object: Neovim would
--- otherwise send `{}` as the empty array `[]`.
local function json_objects(value)
  if type(value) ~= "table" then
    return value
  end
  if next(value) == nil then
    return vim.empty_dict()
  end
  local copy = {}
  for k, v in pairs(value) do
    copy[k] = json_objects(v)
  end
  return copy
end
M._json_objects = json_objects

--- The table handed to vim.lsp.start / vim.lsp.start_client for one root folder.
function M.client_config(root)
  local opts = M.options or copy_options(nil)
  local settings = json_objects(opts.settings)
  return {
    name = opts.name,
    cmd = opts.cmd,
    root_dir = root,
    workspace_folders = { { uri = vim.uri_from_fname(root), name = root } },
    -- Neovim answers workspace/configuration from this table, looked up by section.
    settings = { condhint = settings },
    init_options = { condhint = settings },
    capabilities = opts.capabilities,
    on_attach = function(client, bufnr)
      if inlay_hints_wanted(settings) then
        enable_inlay_hints(bufnr)
      end
      if opts.on_attach then
        opts.on_attach(client, bufnr)
      end
    end,
  }
end

local function live_client(id)
  if id == nil then
    return nil
  end
  local client = vim.lsp.get_client_by_id(id)
  if client == nil or client:is_stopped() then
    return nil
  end
  return client
end

--- Starts (or reuses) the client for the buffer's root and attaches it. Returns the client id,
--- or nil when the buffer is not a file buffer or the server could not be started.
function M.attach(bufnr)
  if bufnr == nil or bufnr == 0 then
    bufnr = vim.api.nvim_get_current_buf()
  end
  if vim.bo[bufnr].buftype ~= "" then
    return nil
  end
  local root = M.find_root(bufnr)
  local config = M.client_config(root)
  if type(vim.lsp.start) == "function" then
    return vim.lsp.start(config, { bufnr = bufnr })
  end
  local id = clients_by_root[root]
  if live_client(id) == nil then
    id = vim.lsp.start_client(config)
    if id == nil then
      return nil
    end
    clients_by_root[root] = id
  end
  vim.lsp.buf_attach_client(bufnr, id)
  return id
end

--- Running condhint clients.
function M.clients()
  local found = {}
  local list = vim.lsp.get_clients and vim.lsp.get_clients() or vim.lsp.get_active_clients()
  for _, client in pairs(list) do
    if client.name == (M.options or M.defaults).name then
      table.insert(found, client)
    end
  end
  return found
end

--- Stops every condhint client and attaches a fresh one to each buffer that had one.
function M.restart()
  local buffers = {}
  for _, client in ipairs(M.clients()) do
    for bufnr in pairs(client.attached_buffers or {}) do
      table.insert(buffers, bufnr)
    end
    vim.lsp.stop_client(client.id)
  end
  clients_by_root = {}
  local function all_stopped()
    return #M.clients() == 0
  end
  vim.wait(5000, all_stopped, 50)
  for _, bufnr in ipairs(buffers) do
    if vim.api.nvim_buf_is_loaded(bufnr) then
      M.attach(bufnr)
    end
  end
end

local function wants_filetype(bufnr, filetypes)
  local ft = vim.bo[bufnr].filetype
  for _, wanted in ipairs(filetypes) do
    if ft == wanted then
      return true
    end
  end
  return false
end

--- Registers the FileType autocommand (group "condhint") that attaches the server, and
--- attaches it to matching buffers that are already open.
function M.setup(opts)
  local options = copy_options(opts)
  validate(options)
  M.options = options

  local group = vim.api.nvim_create_augroup(GROUP, { clear = true })
  vim.api.nvim_create_autocmd("FileType", {
    group = group,
    pattern = options.filetypes,
    desc = "Attach the condhint language server",
    callback = function(args)
      M.attach(args.buf)
    end,
  })
  vim.api.nvim_create_user_command("CondhintRestart", M.restart, {
    desc = "Restart the condhint language server",
    force = true,
  })

  for _, bufnr in ipairs(vim.api.nvim_list_bufs()) do
    if vim.api.nvim_buf_is_loaded(bufnr) and wants_filetype(bufnr, options.filetypes) then
      M.attach(bufnr)
    end
  end
end

return M
