#!/usr/bin/env bash
# Runs the Neovim set-up of docs/editors.md (the block between the
# `nvim-0.7-setup` markers, exactly as written there) in a headless Neovim
# on a copy of the demo recipe with one column misspelt, and checks what
# the guide promises. Needs `nvim` on PATH and `cargo build --release`.
set -euo pipefail
repo="$(cd "$(dirname "$0")/.." && pwd)"
command -v nvim >/dev/null || { echo "nvim-check: nvim is not on PATH" >&2; exit 2; }
[ -x "$repo/target/release/assort" ] || { echo "nvim-check: run cargo build --release first" >&2; exit 2; }
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT

# The set-up, taken from the guide.
sed -n '/<!-- nvim-0.7-setup: begin/,/<!-- nvim-0.7-setup: end/p' "$repo/docs/editors.md" \
  | sed -n '/^```lua$/,/^```$/p' | sed '1d;$d' > "$work/init.lua"
[ -s "$work/init.lua" ] || { echo "nvim-check: no set-up block in docs/editors.md" >&2; exit 1; }

cp -r "$repo/recipes/data" "$work/data"
sed 's/visits_per_month, basket_value/vists_per_month, basket_value/' \
  "$repo/recipes/coop-members.assort" > "$work/coop-members.assort"
cp "$repo/recipes/coop-members.assort" "$work/other.assort"

cat > "$work/probe.lua" <<'LUA'
local out = {}
local function say(s) table.insert(out, s) end
local function finish()
  local f = io.open("result.txt", "w")
  f:write(table.concat(out, "\n") .. "\n")
  f:close()
  vim.cmd("qa!")
end
local first = vim.api.nvim_get_current_buf()
local function misspelt()
  for _, d in ipairs(vim.diagnostic.get(first)) do
    if d.message:find("vists_per_month", 1, true) then return d end
  end
end
vim.wait(15000, function() return misspelt() ~= nil end, 50)
local d = misspelt()
say("diagnostic: " .. (d and string.format("line %d col %d: %s", d.lnum + 1, d.col + 1, d.message:match("[^\n]*")) or "none"))

vim.cmd("edit other.assort")
local second = vim.api.nvim_get_current_buf()
vim.wait(5000, function() return next(vim.lsp.buf_get_clients(second)) ~= nil end, 50)
local ids = {}
for _, b in ipairs({ first, second }) do
  for id, _ in pairs(vim.lsp.buf_get_clients(b)) do ids[id] = true end
end
local n = 0
for _ in pairs(ids) do n = n + 1 end
say("clients for two recipes: " .. n)
vim.cmd("buffer " .. first)

say("omnifunc: " .. vim.api.nvim_buf_get_option(first, "omnifunc"))
local mapped = {}
for _, m in ipairs(vim.api.nvim_buf_get_keymap(first, "n")) do
  mapped[m.lhs] = (m.callback ~= nil) or (m.rhs or ""):find("lsp") ~= nil
end
say("K mapped: " .. tostring(mapped["K"] == true) .. ", gd mapped: " .. tostring(mapped["gd"] == true))

-- Hover on a value word.
local lines = vim.api.nvim_buf_get_lines(first, 0, -1, false)
local zline, zcol
for i, l in ipairs(lines) do
  local c = l:find("zscore", 1, true)
  if c then zline, zcol = i - 1, c end
end
local hover = vim.lsp.buf_request_sync(first, "textDocument/hover", {
  textDocument = { uri = vim.uri_from_bufnr(first) },
  position = { line = zline, character = zcol },
}, 5000)
local text = "none"
for _, r in pairs(hover or {}) do
  if r.result then text = r.result.contents.value:match("[^\n]*") end
end
say("hover on zscore: " .. text)

-- The quick fix for the misspelt column, applied.
if d then
  local lsp_diag = {
    range = { start = { line = d.lnum, character = d.col }, ["end"] = { line = d.end_lnum, character = d.end_col } },
    message = d.message, code = d.code, severity = 1, source = "assort",
  }
  local actions = vim.lsp.buf_request_sync(first, "textDocument/codeAction", {
    textDocument = { uri = vim.uri_from_bufnr(first) },
    range = lsp_diag.range,
    context = { diagnostics = { lsp_diag } },
  }, 5000)
  local action
  for _, r in pairs(actions or {}) do
    for _, a in ipairs(r.result or {}) do action = action or a end
  end
  say("quick fix: " .. (action and action.title or "none"))
  if action then
    vim.lsp.util.apply_workspace_edit(action.edit, "utf-16")
    vim.wait(10000, function() return misspelt() == nil end, 50)
    say("after the fix: " .. (misspelt() and "still misspelt" or "no diagnostic for the column"))
  end
end
finish()
LUA

( cd "$work" && PATH="$repo/target/release:$PATH" timeout 60 \
    nvim --headless -u init.lua coop-members.assort -c "luafile probe.lua" ) >/dev/null 2>&1 || true
[ -f "$work/result.txt" ] || { echo "nvim-check: Neovim wrote no result" >&2; exit 1; }
cat "$work/result.txt"

expect() {
  grep -qF -- "$1" "$work/result.txt" || { echo "nvim-check: FAILED, expected: $1" >&2; exit 1; }
}
expect "diagnostic: line 8 col 25: no column \`vists_per_month\`"
expect "clients for two recipes: 1"
expect "omnifunc: v:lua.vim.lsp.omnifunc"
expect "K mapped: true, gd mapped: true"
expect "hover on zscore: **zscore** (in \`scale\`)"
expect "quick fix: replace \`vists_per_month\` with \`visits_per_month\`"
expect "after the fix: no diagnostic for the column"
echo "nvim-check: the set-up in docs/editors.md works as written"
