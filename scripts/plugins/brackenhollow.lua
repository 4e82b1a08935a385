-- Example plugin: the cask and tank register of Brackenhollow Distilling Co.,
-- Saltmere Quay. The site, its tanks, strapping tables, cask sizes and
-- filling rules are invented; they show how a site keeps its own data and
-- rules in a plugin. Replace them with your own gauged tables.
--
-- Use it with:  meniscus --plugins scripts/plugins
-- then:         brackenhollow.dip_volume("T02", 640)
--
-- Strapping tables are dip (mm, measured at the dip point) → contents (L),
-- gauged at 20 °C; between two rows the volume is interpolated linearly.

-- The tanks: capacity (L, brimful) and strapping table {dip_mm, litres}.
local tanks = {
  T01 = { contents = "low wines receiver", capacity = 6000,
          strap = { {0, 0}, {100, 185}, {400, 1030}, {800, 2245}, {1200, 3470},
                    {1600, 4705}, {1900, 5650}, {1990, 6000} } },
  T02 = { contents = "spirit receiver", capacity = 3500,
          strap = { {0, 0}, {80, 95}, {300, 690}, {600, 1560}, {900, 2435},
                    {1150, 3170}, {1260, 3500} } },
  T03 = { contents = "vatting tank", capacity = 2500,
          strap = { {0, 0}, {50, 40}, {250, 420}, {500, 960}, {750, 1505},
                    {1000, 2050}, {1200, 2500} } },
  T04 = { contents = "neutral spirit tank", capacity = 5000,
          strap = { {0, 0}, {120, 260}, {500, 1240}, {1000, 2570}, {1500, 3905},
                    {1850, 4830}, {1915, 5000} } },
  T05 = { contents = "gin reduction tank", capacity = 2000,
          strap = { {0, 0}, {60, 55}, {300, 505}, {600, 1075}, {900, 1650},
                    {1080, 2000} } },
}

-- Cask types kept at the warehouse: nominal capacity (L), the fraction the
-- site fills them to, and the site's filling strength (% vol at 20 °C).
local casks = {
  barrel   = { nominal = 200, fill = 0.97 },
  hogshead = { nominal = 250, fill = 0.97 },
  butt     = { nominal = 500, fill = 0.98 },
  quarter  = { nominal = 125, fill = 0.96 },
}
local FILL_ABV = 63.5

local function tank_of(code)
  local t = tanks[code]
  if not t then
    local known = {}
    for k in pairs(tanks) do known[#known + 1] = k end
    table.sort(known)
    error(("unknown tank %q (tanks: %s)"):format(tostring(code), table.concat(known, ", ")), 3)
  end
  return t
end

local function number_arg(x, what)
  if type(x) ~= "number" or x ~= x or x == math.huge or x == -math.huge then
    error(("%s must be a finite number, got %s"):format(what, tostring(x)), 3)
  end
  return x
end

-- Linear interpolation in a strapping table, column `from` → column `to`.
local function interpolate(strap, x, from, to, what, unit)
  local first, last = strap[1][from], strap[#strap][from]
  if x < first or x > last then
    error(("%s %g %s is outside the strapping table (%g to %g %s)"):format(
      what, x, unit, first, last, unit), 3)
  end
  for i = 2, #strap do
    local a, b = strap[i - 1], strap[i]
    if x <= b[from] then
      return a[to] + (b[to] - a[to]) * (x - a[from]) / (b[from] - a[from])
    end
  end
  return strap[#strap][to]
end

local ethanol_water = mixture.ethanol_water()

local function dip_volume(tank, dip_mm)
  local t = tank_of(tank)
  return interpolate(t.strap, number_arg(dip_mm, "dip_mm"), 1, 2, "dip", "mm")
end

return {
  name = "brackenhollow",
  version = "1.0.0",
  api = 1,
  description = "Brackenhollow Distilling Co. (Saltmere Quay): tank strapping, cask fills (invented example data)",
  functions = {
    capacity = {
      fn = function(tank) return tank_of(tank).capacity end,
      doc = "Brimful capacity of a tank, L.",
      args = { { name = "tank", doc = "tank code, T01 to T05" } },
    },
    dip_volume = {
      fn = dip_volume,
      doc = "Contents of a tank from a dip reading, L at the gauging temperature\n"
         .. "(linear interpolation in the tank's strapping table).",
      args = {
        { name = "tank", doc = "tank code, T01 to T05" },
        { name = "dip_mm", unit = "mm", doc = "depth of liquid at the dip point" },
      },
    },
    dip_for_volume = {
      fn = function(tank, volume_l)
        local t = tank_of(tank)
        return interpolate(t.strap, number_arg(volume_l, "volume_l"), 2, 1, "volume", "L")
      end,
      doc = "The dip at which a tank holds a volume, mm (the inverse of dip_volume).",
      args = {
        { name = "tank", doc = "tank code, T01 to T05" },
        { name = "volume_l", unit = "L", doc = "volume in the tank" },
      },
    },
    tank_lpa = {
      fn = function(tank, dip_mm, abv, t_c)
        local v = dip_volume(tank, dip_mm)
        number_arg(abv, "abv")
        number_arg(t_c, "t_c")
        local v20 = ethanol_water:volume_at{ abv = abv, volume = v, from = t_c, to = 20 }
        return v20 * abv / 100
      end,
      doc = "Litres of pure alcohol at 20 °C in a tank: the dip volume (at the liquid's\n"
         .. "temperature) brought to 20 °C with the reference equation, times the\n"
         .. "strength. A calculation for stock records; excise declarations use the\n"
         .. "gauging method and tables the authority prescribes.",
      args = {
        { name = "tank", doc = "tank code, T01 to T05" },
        { name = "dip_mm", unit = "mm", doc = "depth of liquid at the dip point" },
        { name = "abv", unit = "% vol at 20 °C", doc = "true strength of the contents" },
        { name = "t_c", unit = "°C", doc = "temperature of the liquid" },
      },
    },
    cask_fill = {
      fn = function(kind, abv)
        local c = casks[kind]
        if not c then
          error(("unknown cask type %q (barrel, hogshead, butt, quarter)"):format(tostring(kind)), 2)
        end
        abv = abv == nil and FILL_ABV or number_arg(abv, "abv")
        local fill_l = c.nominal * c.fill
        return { kind = kind, nominal_l = c.nominal, fill_l = fill_l, abv = abv,
                 lpa = fill_l * abv / 100 }
      end,
      doc = "A cask filling at the site's rules: volume filled (L at 20 °C), strength\n"
         .. "(% vol; the site fills at 63.5 unless given) and litres of pure alcohol.",
      args = {
        { name = "kind", doc = "barrel, hogshead, butt or quarter" },
        { name = "abv", unit = "% vol at 20 °C", doc = "filling strength (optional, default 63.5)" },
      },
    },
    tanks = {
      fn = function()
        local out = {}
        for code, t in pairs(tanks) do
          out[#out + 1] = { tank = code, contents = t.contents, capacity_l = t.capacity }
        end
        table.sort(out, function(a, b) return a.tank < b.tank end)
        return out
      end,
      doc = "The tank register: code, contents and capacity (L) of every tank.",
      args = {},
    },
  },
}
