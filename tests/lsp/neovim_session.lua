-- A Neovim session against `sdeck lsp`, run headless by test_neovim.py: open a model,
-- wait for its diagnostics, hover, apply the Feller quick fix, edit, format, and write
-- what happened to a JSON file. Written for Neovim 0.7 (the distribution's package) and
-- later: only vim.lsp.start_client and buf_request_sync, no newer helpers.
local sdeck, model, out = SDECK_BIN, SDECK_MODEL, SDECK_OUT
local result = { steps = {} }

local function finish()
  local file = io.open(out, "w")
  file:write(vim.fn.json_encode(result))
  file:close()
  vim.cmd("qall!")
end

local function fail(why)
  result.error = why
  finish()
end

vim.cmd("edit " .. vim.fn.fnameescape(model))
local buf = vim.api.nvim_get_current_buf()
local client_id = vim.lsp.start_client({
  name = "sdeck",
  cmd = { sdeck, "lsp" },
  root_dir = vim.fn.fnamemodify(model, ":h"),
})
if not client_id then
  return fail("the client did not start")
end
vim.lsp.buf_attach_client(buf, client_id)

local function codes()
  local list = {}
  for _, d in ipairs(vim.diagnostic.get(buf)) do
    table.insert(list, d.code or (d.user_data and d.user_data.lsp and d.user_data.lsp.code) or "?")
  end
  table.sort(list)
  return list
end

local function has(code)
  for _, c in ipairs(codes()) do
    if c == code then
      return true
    end
  end
  return false
end

if not vim.wait(20000, function() return has("feller-condition") end, 50) then
  return fail("no feller-condition diagnostic: " .. vim.inspect(codes()))
end
result.opened = codes()

-- Hover on the factor in its equation.
local lines = vim.api.nvim_buf_get_lines(buf, 0, -1, false)
local equation
for i, line in ipairs(lines) do
  if line:match("^dr ") then
    equation = i - 1
  end
end
local doc = { uri = vim.uri_from_bufnr(buf) }
local hover = vim.lsp.buf_request_sync(buf, "textDocument/hover",
  { textDocument = doc, position = { line = equation, character = 1 } }, 10000)
local _, answer = next(hover or {})
result.hover = answer and answer.result and answer.result.contents.value or ""

-- The quick fix that raises the speed.
local feller
for _, d in ipairs(vim.diagnostic.get(buf)) do
  if d.code == "feller-condition" then
    feller = d
  end
end
local range = {
  start = { line = feller.lnum, character = feller.col },
  ["end"] = { line = feller.end_lnum, character = feller.end_col },
}
local lsp_diagnostic = { range = range, message = feller.message, code = "feller-condition", severity = 2 }
local actions = vim.lsp.buf_request_sync(buf, "textDocument/codeAction",
  { textDocument = doc, range = range, context = { diagnostics = { lsp_diagnostic } } }, 10000)
local _, listed = next(actions or {})
for _, action in ipairs(listed and listed.result or {}) do
  if action.title:match("^Raise") and action.edit then
    result.fix = action.title
    vim.lsp.util.apply_workspace_edit(action.edit, "utf-16")
  end
end
if not result.fix then
  return fail("no Raise quick fix offered")
end
if not vim.wait(20000, function() return not has("feller-condition") end, 50) then
  return fail("the fix left feller-condition: " .. vim.inspect(codes()))
end
result.fixed = codes()
result.fixed_text = vim.api.nvim_buf_get_lines(buf, 0, -1, false)

-- An edit that breaks the model: a name nobody declared.
vim.api.nvim_buf_set_lines(buf, equation, equation + 1, false,
  { "dr = kappa * (theta - r) dt + xi * sqrt(r) dQ" })
if not vim.wait(20000, function() return #vim.diagnostic.get(buf) > 0 end, 50) then
  return fail("no diagnostic after the edit")
end
result.edited = codes()
vim.api.nvim_buf_set_lines(buf, equation, equation + 1, false,
  { "dr   =  kappa * (theta - r) dt + xi * sqrt(r) dW" })
if not vim.wait(20000, function() return #vim.diagnostic.get(buf) == 0 end, 50) then
  return fail("diagnostics left after the repair: " .. vim.inspect(codes()))
end

-- Formatting.
local formatted = vim.lsp.buf_request_sync(buf, "textDocument/formatting",
  { textDocument = doc, options = { tabSize = 4, insertSpaces = true } }, 10000)
local _, edits = next(formatted or {})
if edits and edits.result then
  vim.lsp.util.apply_text_edits(edits.result, buf, "utf-16")
end
result.formatted = vim.api.nvim_buf_get_lines(buf, 0, -1, false)
finish()
