-- Drives Neovim 0.7.2's built-in LSP client against the Saltus language server and records
-- what the client received, as JSON, for tests/e2e/neovim.e2e.mjs to judge. It asserts
-- nothing itself: it opens the files, waits for the server, asks, runs two CodeLenses
-- (Neovim's own vim.lsp.codelens.run, which sends workspace/executeCommand), edits and shuts
-- down. The user's choices (which lens, which language) are answered from the input.
-- Run: nvim --headless --clean -u NONE -c "luafile probe.lua" -c 'cquit 2' </dev/null
-- with SALTUS_PROBE_IN (a JSON file: server command, files, positions, the edit) and
-- SALTUS_PROBE_OUT (where the JSON record goes) in the environment.
-- Invariants: every wait is bounded; any Lua error is caught (xpcall), written to the
-- record and ends nvim with `cquit 1`, so headless nvim never waits for input.
local input = vim.fn.json_decode(table.concat(vim.fn.readfile(os.getenv('SALTUS_PROBE_IN')), '\n'))
local out_path = os.getenv('SALTUS_PROBE_OUT')
local record = { steps = {}, published = {} }

local function now_ms() return vim.loop.hrtime() / 1e6 end
local started = now_ms()
local function step(name) table.insert(record.steps, { name = name, at_ms = math.floor(now_ms() - started) }) end

local function save()
  vim.fn.writefile({ vim.fn.json_encode(record) }, out_path)
end

local function main()
  vim.cmd('autocmd BufNewFile,BufRead *.saltus setfiletype saltus')
  vim.lsp.set_log_level('WARN')

  vim.cmd('edit ' .. vim.fn.fnameescape(input.mistakes.path))
  local mistakes = vim.api.nvim_get_current_buf()
  vim.cmd('edit ' .. vim.fn.fnameescape(input.clean.path))
  local clean = vim.api.nvim_get_current_buf()
  record.filetype = vim.bo[mistakes].filetype

  local exited = nil
  local client_id = vim.lsp.start_client({
    name = 'saltus',
    cmd = input.cmd,
    root_dir = input.root,
    flags = { debounce_text_changes = 0 },
    handlers = {
      ['textDocument/publishDiagnostics'] = function(err, result, ctx, config)
        table.insert(record.published, { at_ms = math.floor(now_ms() - started), uri = result.uri, version = result.version, diagnostics = result.diagnostics })
        return vim.lsp.diagnostic.on_publish_diagnostics(err, result, ctx, config)
      end,
    },
    on_exit = function(code, signal) exited = { code = code, signal = signal, at_ms = math.floor(now_ms() - started) } end,
  })
  assert(client_id, 'vim.lsp.start_client returned nil')
  vim.lsp.buf_attach_client(mistakes, client_id)
  vim.lsp.buf_attach_client(clean, client_id)
  local ns = vim.lsp.diagnostic.get_namespace(client_id)
  step('started')

  local got = vim.wait(20000, function() return #vim.diagnostic.get(mistakes, { namespace = ns }) > 0 end, 10)
  step('diagnostics')
  record.diagnostics_arrived = got
  local client = vim.lsp.get_client_by_id(client_id)
  local caps = client and client.server_capabilities or {}
  record.capabilities = {
    executeCommands = caps.executeCommandProvider and caps.executeCommandProvider.commands or {},
    workspaceSymbol = caps.workspaceSymbolProvider and true or false,
    hover = caps.hoverProvider and true or false,
    completion = caps.completionProvider ~= nil,
    codeAction = caps.codeActionProvider and true or false,
    definition = caps.definitionProvider and true or false,
    rename = caps.renameProvider and true or false,
    formatting = caps.documentFormattingProvider and true or false,
  }
  record.server_info = client and client.server_info or vim.NIL
  -- what vim.diagnostic holds (0-based lnum/col), as a user's :lua vim.diagnostic.get() shows
  record.nvim_diagnostics = {}
  for _, d in ipairs(vim.diagnostic.get(mistakes, { namespace = ns })) do
    table.insert(record.nvim_diagnostics, { lnum = d.lnum, col = d.col, end_lnum = d.end_lnum, end_col = d.end_col, severity = d.severity, message = d.message })
  end

  local function uri(buf) return vim.uri_from_bufnr(buf) end
  local hover = vim.lsp.buf_request_sync(clean, 'textDocument/hover',
    { textDocument = { uri = uri(clean) }, position = input.hover }, 10000)
  record.hover = hover and hover[client_id] or vim.NIL
  step('hover')

  local completion = vim.lsp.buf_request_sync(clean, 'textDocument/completion',
    { textDocument = { uri = uri(clean) }, position = input.completion, context = { triggerKind = 1 } }, 10000)
  local c = completion and completion[client_id] or nil
  record.completion_error = c and c.err or vim.NIL
  record.completion = {}
  if c and c.result then
    local items = c.result.items or c.result
    for _, it in ipairs(items) do table.insert(record.completion, { label = it.label, kind = it.kind }) end
  end
  step('completion')

  -- CodeLens through workspace/executeCommand, as a user runs it (vim.lsp.codelens.run on
  -- the neuron's line): the user's choices in vim.ui.select (which lens) and in the
  -- server's window/showMessageRequest (which language) are answered as input.lens_run says
  local shown_messages = {}
  vim.lsp.handlers['window/showMessage'] = function(_, result) table.insert(shown_messages, result.message) end
  local asked = {}
  vim.lsp.handlers['window/showMessageRequest'] = function(_, result)
    table.insert(asked, { message = result.message, actions = vim.tbl_map(function(a) return a.title end, result.actions or {}) })
    for _, a in ipairs(result.actions or {}) do
      if a.title == input.lens_run.target then return a end
    end
    return vim.NIL
  end
  local picked_from = {}
  local want_lens = nil
  vim.ui.select = function(items, opts, on_choice)
    local titles = {}
    for _, it in ipairs(items) do
      local title = opts.format_item and opts.format_item(it) or tostring(it)
      table.insert(titles, title)
    end
    table.insert(picked_from, titles)
    for i, it in ipairs(items) do
      if type(it) == 'table' and it.lens and it.lens.command and it.lens.command.command == want_lens then return on_choice(it, i) end
    end
    return on_choice(nil, nil)
  end
  vim.api.nvim_set_current_buf(clean)
  vim.lsp.codelens.refresh()
  local got_lenses = vim.wait(20000, function() return #(vim.lsp.codelens.get(clean) or {}) > 0 end, 10)
  record.lenses = {}
  for _, l in ipairs(vim.lsp.codelens.get(clean) or {}) do
    table.insert(record.lenses, { line = l.range.start.line, title = l.command and l.command.title or vim.NIL, command = l.command and l.command.command or vim.NIL })
  end
  record.lenses_arrived = got_lenses
  vim.api.nvim_win_set_cursor(0, { input.lens_run.line + 1, 0 })
  -- the adjoint lens: its text arrives as window/showMessage
  want_lens = input.lens_run.adjoint_command
  vim.lsp.codelens.run()
  local adjoint_shown = vim.wait(20000, function() return #shown_messages > 0 end, 10)
  -- the generate lens: the server asks for the language, then writes into generated/
  want_lens = input.lens_run.generate_command
  local before_messages = #shown_messages
  vim.lsp.codelens.run()
  local generated = vim.wait(20000, function() return #shown_messages > before_messages end, 10)
  record.lens_run = { adjoint_shown = adjoint_shown, generated = generated, messages = shown_messages, asked = asked, picked_from = picked_from,
    files = vim.fn.glob(input.lens_run.generated .. '/*', false, true) }
  step('codelens')

  -- workspace symbols: the neurons of the folder's .saltus files, open or not
  local symbols = vim.lsp.buf_request_sync(clean, 'workspace/symbol', { query = '' }, 10000)
  local s = symbols and symbols[client_id] or {}
  record.workspace_symbols = {}
  for _, sym in ipairs(s.result or {}) do table.insert(record.workspace_symbols, { name = sym.name, uri = sym.location.uri }) end
  step('workspace symbols')

  -- the edit: replace one line of the mistakes file as a user would (nvim_buf_set_lines)
  local published_before = #record.published
  local edit_at = now_ms()
  vim.api.nvim_buf_set_lines(mistakes, input.edit.line, input.edit.line + 1, false, { input.edit.text })
  local cleared = vim.wait(10000, function()
    for i = published_before + 1, #record.published do
      local p = record.published[i]
      if p.uri == uri(mistakes) then
        for _, d in ipairs(p.diagnostics) do
          if d.range.start.line == input.edit.line then return false end
        end
        return true
      end
    end
    return false
  end, 1)
  record.edit = { cleared = cleared, round_trip_ms = now_ms() - edit_at, line_now = vim.api.nvim_buf_get_lines(mistakes, input.edit.line, input.edit.line + 1, false)[1] }
  record.after_edit = {}
  for _, d in ipairs(vim.diagnostic.get(mistakes, { namespace = ns })) do
    table.insert(record.after_edit, { lnum = d.lnum, col = d.col, message = d.message })
  end
  step('edit')

  local stop_at = now_ms()
  vim.lsp.stop_client(client_id)
  local stopped = vim.wait(10000, function() return exited ~= nil end, 10)
  record.shutdown = { exited = exited or vim.NIL, within_ms = now_ms() - stop_at, stopped = stopped,
    client_gone = vim.lsp.get_client_by_id(client_id) == nil }
  step('shutdown')
  record.lsp_log = vim.lsp.get_log_path()
end

local ok, err = xpcall(main, debug.traceback)
if not ok then record.error = tostring(err) end
local wrote, werr = pcall(save)
if ok and wrote then
  vim.cmd('qall!')
else
  if not wrote then io.stderr:write('probe: could not write the record: ' .. tostring(werr) .. '\n') end
  vim.cmd('cquit 1')
end
