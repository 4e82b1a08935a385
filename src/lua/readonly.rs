//! Read-only views of shared tables, and private environments built on
//! them, so that code the user did not write in the main script (plugins)
//! and code compiled by meniscus from text (sheet expression formulas)
//! cannot change what other code sees.
//!
//! - A *view* of a table reads through to it (nested tables come back as
//!   views too), refuses every assignment, iterates with `pairs` and has a
//!   length; its metatable is locked. Views are cached, one per table.
//! - A *private environment* (`_ENV`) is a fresh table whose missing names
//!   read the globals through views. Assignments to globals land in the
//!   environment itself (for a plugin: its own globals) or are refused (a
//!   read-only environment, for formulas). `_G` is the environment, and
//!   `load` compiles into it by default, so neither leads back to the real
//!   globals.
//! - `rawset` is replaced by one that refuses views and read-only
//!   environments: `rawset` is the one base function that writes past
//!   `__newindex` (the table library honours metamethods in Lua 5.4).
//!
//! Nothing here copies a table: a view sees later changes the main script
//! makes to its own globals.

use mlua::chunk::ChunkMode;
use mlua::{Function, Lua, Table, Value};

const KEY_VIEW: &str = "meniscus.readonly.view";
const KEY_ENV: &str = "meniscus.readonly.env";
const KEY_INNER: &str = "meniscus.readonly.inner";

const SETUP: &str = r#"
local G, raw_rawset, raw_load, setmetatable, type, pairs, error, tostring = ...
local views = setmetatable({}, { __mode = "k" })     -- table -> its view
local inner = setmetatable({}, { __mode = "k" })     -- view -> its table
local protected = setmetatable({}, { __mode = "k" }) -- views and read-only envs

local function refuse(_, k)
  error("cannot assign '" .. tostring(k) .. "': this table is shared and read-only here", 2)
end

local view
local function wrap(x)
  if type(x) == "table" then return view(x) end
  return x
end

local view_of_G_load = function(chunk, name, mode, env)
  return raw_load(chunk, name, mode, env or view(G))
end

function view(t)
  if protected[t] then return t end
  local v = views[t]
  if v then return v end
  local index
  if t == G then
    index = function(_, k)
      if k == "load" then return view_of_G_load end
      return wrap(G[k])
    end
  else
    index = function(_, k) return wrap(t[k]) end
  end
  v = setmetatable({}, {
    __index = index,
    __newindex = refuse,
    __pairs = function()
      local f, s, c = pairs(t)
      return function()
        local k, x = f(s, c)
        c = k
        return k, wrap(x)
      end
    end,
    __len = function() return #t end,
    __metatable = false,
  })
  views[t] = v
  inner[v] = t
  protected[v] = true
  return v
end

local function make_env(readonly)
  local env = {}
  local function env_load(chunk, name, mode, e)
    return raw_load(chunk, name, mode, e or env)
  end
  setmetatable(env, {
    __index = function(_, k)
      if k == "_G" then return env end
      if k == "load" then return env_load end
      local x = G[k]
      if type(x) == "table" then return view(x) end
      return x
    end,
    __newindex = readonly and refuse or nil,
    __metatable = false,
  })
  if readonly then protected[env] = true end
  return env
end

raw_rawset(G, "rawset", function(t, k, v)
  if protected[t] then
    error("rawset: this table is shared and read-only here", 2)
  end
  return raw_rawset(t, k, v)
end)

return view, make_env, inner
"#;

/// Installs the views, the environments and the guarded `rawset`. Call
/// after the sandbox has replaced `load`.
pub fn register(lua: &Lua) -> mlua::Result<()> {
    let g = lua.globals();
    let setup = lua
        .load(SETUP)
        .set_name("=(meniscus)")
        .set_mode(ChunkMode::Text)
        .into_function()?;
    let (view, env, inner): (Function, Function, Table) = setup.call((
        g.clone(),
        g.raw_get::<Function>("rawset")?,
        g.raw_get::<Function>("load")?,
        g.raw_get::<Function>("setmetatable")?,
        g.raw_get::<Function>("type")?,
        g.raw_get::<Function>("pairs")?,
        g.raw_get::<Function>("error")?,
        g.raw_get::<Function>("tostring")?,
    ))?;
    lua.set_named_registry_value(KEY_VIEW, view)?;
    lua.set_named_registry_value(KEY_ENV, env)?;
    lua.set_named_registry_value(KEY_INNER, inner)?;
    Ok(())
}

/// The read-only view of `t` (the same view every time).
pub fn view(lua: &Lua, t: &Table) -> mlua::Result<Table> {
    let f: Function = lua.named_registry_value(KEY_VIEW)?;
    f.call(t.clone())
}

/// A fresh private environment. `readonly`: assignments to globals are
/// refused (formulas); otherwise they stay in the environment (plugins).
pub fn private_env(lua: &Lua, readonly: bool) -> mlua::Result<Table> {
    let f: Function = lua.named_registry_value(KEY_ENV)?;
    f.call(readonly)
}

/// The table behind a view, if `t` is one (for completion and listings,
/// which must not run metamethods).
pub fn inner(lua: &Lua, t: &Table) -> Option<Table> {
    let map: Table = lua.named_registry_value(KEY_INNER).ok()?;
    match map.raw_get::<Value>(t.clone()).ok()? {
        Value::Table(inner) => Some(inner),
        _ => None,
    }
}
