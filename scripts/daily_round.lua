-- The daily round of a small distillery's tank room, end to end:
--
--   1. read the morning gauging round (tank_log.csv) and the day's work
--      orders (orders.csv);
--   2. per tank, the true strength at 20 °C from the instrument reading
--      (density meter, % vol hydrometer or US proof hydrometer, each at the
--      liquid's temperature), the mass, the volume at 20 °C, the litres of
--      pure alcohol (LPA) and the US proof gallons; a weighed drum is
--      corrected for air buoyancy;
--   3. the orders in sequence: reductions with water at its own temperature
--      (exact in mass, so the contraction on mixing is accounted for), then
--      bottling of the reduced lot;
--   4. out/tanks.csv, out/plan.csv and an SVG chart, written only once every
--      figure is computed, and a summary on screen with the cautions.
--
-- Usage:  meniscus run scripts/daily_round.lua [DATA_DIR [OUT_DIR]]
-- (defaults demo-data and out, relative to the working directory; the data
-- in demo-data/ are invented, for a fictional distillery).

local data_dir = arg[1] or "demo-data"
local out_dir = arg[2] or "out"
local tank_file = data_dir .. "/tank_log.csv"
local order_file = data_dir .. "/orders.csv"

local m = mixture.ethanol_water()

---------------------------------------------------------------- helpers

-- Runs f(...) and, on error, raises the error again prefixed with `where`
-- (a data file, row and item) and located at the caller's line, so the
-- message says both which input was bad and where the script stopped.
local function try(where, f, ...)
  local ok, result = pcall(f, ...)
  if ok then
    return result
  end
  local msg = tostring(result):gsub("^[^\n]-:%d+: ", "", 1)
  error(where .. ": " .. msg, 2)
end

-- A required number in a CSV row: present, numeric, finite.
local function number_field(row, where, name)
  local v = row[name]
  if v == nil then
    error(where .. ": " .. name .. " is missing", 2)
  end
  local x = tonumber(v)
  if x == nil or x ~= x or x == math.huge or x == -math.huge then
    error(("%s: %s must be a finite number, got '%s'"):format(where, name, tostring(v)), 2)
  end
  return x
end

-- A required text in a CSV row.
local function text_field(row, where, name)
  local v = row[name]
  if v == nil or v == "" then
    error(where .. ": " .. name .. " is missing", 2)
  end
  return tostring(v)
end

-- x rounded to `places` decimals, for the CSV files: the model carries
-- more digits than any gauge, and 0.001 L or 0.0001 % vol is far below
-- what a tank or a hydrometer resolves.
local function round(x, places)
  if x == nil then
    return nil
  end
  return tonumber(("%." .. places .. "f"):format(x))
end

local function keys_of(t)
  local ks = {}
  for k in pairs(t) do
    ks[#ks + 1] = k
  end
  table.sort(ks)
  return table.concat(ks, ", ")
end

---------------------------------------------------------------- the tanks

-- Strength from the instrument reading at the liquid's temperature.
local INSTRUMENTS = {
  density = {
    unit = "kg/m3",
    strength = function(reading, t) return m:strength{density = reading, t = t} end,
  },
  hydrometer_abv = {
    unit = "% vol",
    strength = function(reading, t) return m:hydrometer{abv = reading, t = t} end,
  },
  hydrometer_proof = {
    unit = "proof",
    strength = function(reading, t) return m:hydrometer{proof = reading, t = t} end,
  },
}

-- The lot's amount as pure_alcohol takes it: litres gauged at t, or a
-- balance reading in kg (weighed in air).
local UNITS = {
  L = function(amount, t, w) return {volume = amount, t = t, w = w} end,
  kg = function(amount, t, w) return {mass = amount, air = true, t = t, w = w} end,
}

local tank_rows = files.read_csv(tank_file)
local tanks, by_name = {}, {}
for i, row in ipairs(tank_rows) do
  local where = ("%s row %d"):format(tank_file, i)
  local name = text_field(row, where, "tank")
  where = ("%s (tank %s)"):format(where, name)
  if by_name[name] then
    error(where .. ": tank " .. name .. " is listed twice")
  end
  local instrument = text_field(row, where, "instrument")
  local inst = INSTRUMENTS[instrument]
  if inst == nil then
    error(("%s: unknown instrument '%s' (known: %s)"):format(where, instrument, keys_of(INSTRUMENTS)))
  end
  local unit = text_field(row, where, "unit")
  local as_lot = UNITS[unit]
  if as_lot == nil then
    error(("%s: unknown unit '%s' (known: %s)"):format(where, unit, keys_of(UNITS)))
  end
  local amount = number_field(row, where, "amount")
  local reading = number_field(row, where, "reading")
  local t = number_field(row, where, "t_c")
  local s = try(where, inst.strength, reading, t)
  local pa = try(where, m.pure_alcohol, m, as_lot(amount, t, s.w))
  local tank = {
    name = name,
    contents = row.contents or "",
    instrument = instrument,
    inst_unit = inst.unit,
    reading = reading,
    t = t,
    amount = amount,
    unit = unit,
    abv = pa.abv,
    proof = pa.proof,
    w = pa.w,
    mass = pa.mass,
    volume = pa.volume,
    lpa = pa.lpa,
    proof_gallons = pa.proof_gallons,
    water_added = 0,
    bottled = 0,
  }
  -- What is in the tank as the orders go: true mass and mass fraction
  -- (conserved on mixing), with its volume, strength and LPA.
  tank.now = {mass = pa.mass, w = pa.w, volume = pa.volume, abv = pa.abv, lpa = pa.lpa}
  tanks[#tanks + 1] = tank
  by_name[name] = tank
end
if #tanks == 0 then
  error(tank_file .. ": no tanks in the log")
end

---------------------------------------------------------------- the orders

local order_rows = files.read_csv(order_file, {allow_empty = true})
local plan = {}

local function reduce(order, tank, where, row)
  local target = number_field(row, where, "target_abv")
  local water_t = number_field(row, where, "water_t_c")
  local now = tank.now
  if target >= now.abv then
    error(("%s: the target %.2f %% vol is not below tank %s's strength %.2f %% vol; water only lowers the strength")
      :format(where, target, tank.name, now.abv))
  end
  local r = try(where, m.reduce, m, {mass = now.mass, w = now.w, target = target, water_t = water_t})
  local step = {
    order = order, tank = tank.name, action = "reduce",
    abv_before = now.abv, volume_before = now.volume,
    target_abv = target, water_t_c = water_t,
    water_l_at_t = r.water_at_t, water_kg = r.water_kg, water_l20 = r.water,
    contraction_l = r.contraction, naive_water_l = r.naive_water,
    volume_after = r.volume, abv_after = r.abv, lpa_after = r.volume * r.abv / 100,
  }
  tank.water_added = tank.water_added + r.water
  tank.now = {mass = r.mass, w = r.w, volume = r.volume, abv = r.abv, lpa = step.lpa_after}
  return step
end

local function bottle(order, tank, where, row)
  local size = number_field(row, where, "bottle_l")
  local now = tank.now
  local b = try(where, m.bottles, m, {mass = now.mass, w = now.w, size = size})
  local left = try(where, m.pure_alcohol, m, {volume = b.remainder, t = 20, w = now.w})
  local step = {
    order = order, tank = tank.name, action = "bottle",
    abv_before = now.abv, volume_before = now.volume,
    bottle_l = size, bottles = b.count, bottled_l20 = b.count * size,
    remainder_l20 = b.remainder,
    volume_after = left.volume, abv_after = left.abv, lpa_after = left.lpa,
  }
  tank.bottled = tank.bottled + b.count * size
  tank.now = {mass = left.mass, w = now.w, volume = left.volume, abv = now.abv, lpa = left.lpa}
  return step
end

local ACTIONS = {reduce = reduce, bottle = bottle}

for i, row in ipairs(order_rows) do
  local where = ("%s row %d"):format(order_file, i)
  local order = text_field(row, where, "order")
  where = ("%s (order %s)"):format(where, order)
  local tank_name = text_field(row, where, "tank")
  local tank = by_name[tank_name]
  if tank == nil then
    error(("%s: tank '%s' is not in %s"):format(where, tank_name, tank_file))
  end
  local action = text_field(row, where, "action")
  local act = ACTIONS[action]
  if act == nil then
    error(("%s: unknown action '%s' (known: %s)"):format(where, action, keys_of(ACTIONS)))
  end
  plan[#plan + 1] = act(order, tank, where, row)
end

---------------------------------------------------------------- outputs

local TANK_COLUMNS = {
  "tank", "contents", "instrument", "reading", "t_c", "amount", "unit",
  "abv", "proof", "w", "mass_kg", "volume_l20", "lpa", "proof_gallons",
  "water_added_l20", "bottled_l20", "end_volume_l20", "end_abv", "end_lpa",
}
local tank_out = {}
for _, k in ipairs(tanks) do
  tank_out[#tank_out + 1] = {
    tank = k.name, contents = k.contents, instrument = k.instrument,
    reading = k.reading, t_c = k.t, amount = k.amount, unit = k.unit,
    abv = round(k.abv, 4), proof = round(k.proof, 4), w = round(k.w, 8),
    mass_kg = round(k.mass, 3), volume_l20 = round(k.volume, 3),
    lpa = round(k.lpa, 3), proof_gallons = round(k.proof_gallons, 3),
    water_added_l20 = round(k.water_added, 3), bottled_l20 = round(k.bottled, 3),
    end_volume_l20 = round(k.now.volume, 3), end_abv = round(k.now.abv, 4),
    end_lpa = round(k.now.lpa, 3),
  }
end

local PLAN_COLUMNS = {
  "order", "tank", "action", "abv_before", "volume_before_l20",
  "target_abv", "water_t_c", "water_l_at_t", "water_kg", "water_l20",
  "contraction_l", "naive_water_l",
  "bottle_l", "bottles", "bottled_l20", "remainder_l20",
  "volume_after_l20", "abv_after", "lpa_after",
}
local plan_out = {}
for _, s in ipairs(plan) do
  plan_out[#plan_out + 1] = {
    order = s.order, tank = s.tank, action = s.action,
    abv_before = round(s.abv_before, 4), volume_before_l20 = round(s.volume_before, 3),
    target_abv = s.target_abv, water_t_c = s.water_t_c,
    water_l_at_t = round(s.water_l_at_t, 3), water_kg = round(s.water_kg, 3),
    water_l20 = round(s.water_l20, 3), contraction_l = round(s.contraction_l, 3),
    naive_water_l = round(s.naive_water_l, 3),
    bottle_l = s.bottle_l, bottles = s.bottles, bottled_l20 = round(s.bottled_l20, 3),
    remainder_l20 = round(s.remainder_l20, 3),
    volume_after_l20 = round(s.volume_after, 3), abv_after = round(s.abv_after, 4),
    lpa_after = round(s.lpa_after, 3),
  }
end

local names, lpa_morning, water, lpa_end = {}, {}, {}, {}
for i, k in ipairs(tanks) do
  names[i] = k.name
  lpa_morning[i] = k.lpa
  water[i] = k.water_added
  lpa_end[i] = k.now.lpa
end

-- Everything is computed: only now create the output directory and write.
files.mkdir(out_dir)
local tanks_csv = out_dir .. "/tanks.csv"
local plan_csv = out_dir .. "/plan.csv"
local chart_svg = out_dir .. "/daily_round.svg"
files.write_csv(tanks_csv, TANK_COLUMNS, tank_out)
files.write_csv(plan_csv, PLAN_COLUMNS, plan_out)
plot.bars(chart_svg, {
  title = "Daily round: pure alcohol per tank and water added",
  categories = names,
  series = {
    {name = "pure alcohol, morning (LPA)", values = lpa_morning},
    {name = "water added (L at 20 °C)", values = water},
    {name = "pure alcohol in tank, end of day (LPA)", values = lpa_end},
  },
  y_label = "litres (at 20 °C)",
})

---------------------------------------------------------------- summary

local function p(fmt, ...)
  print(fmt:format(...))
end

p("Daily round (data: %s)", data_dir)
p("")
p("Tanks: true strength at 20 °C from the morning readings")
p("tank  contents                   reading           t (°C)   %% vol   proof  L at 20°C       LPA  proof gal")
local total_lpa, total_pg = 0, 0
for _, k in ipairs(tanks) do
  p("%-5s %-26s %-16s %7.1f %7.2f %7.2f %10.1f %9.1f %10.1f",
    k.name, k.contents:sub(1, 26), ("%.2f %s"):format(k.reading, k.inst_unit), k.t,
    k.abv, k.proof, k.volume, k.lpa, k.proof_gallons)
  total_lpa = total_lpa + k.lpa
  total_pg = total_pg + k.proof_gallons
end
p("Total: %.1f litres of pure alcohol (%.1f US proof gallons)", total_lpa, total_pg)
p("")
p("Orders, in sequence")
local total_water = 0
for _, s in ipairs(plan) do
  if s.action == "reduce" then
    total_water = total_water + s.water_l20
    p("%-6s %-4s reduce %.2f -> %.2f %% vol: add %.1f L of water at %.1f °C (%.1f kg; %.1f L at 20 °C)",
      s.order, s.tank, s.abv_before, s.target_abv, s.water_l_at_t, s.water_t_c, s.water_kg, s.water_l20)
    p("%-11s %.1f L -> %.1f L at 20 °C; contraction %.1f L (adding volumes would call for %.1f L of water)",
      "", s.volume_before, s.volume_after, s.contraction_l, s.naive_water_l)
  else
    p("%-6s %-4s bottle %.2f L at %.2f %% vol: %d bottles of %.2f L, %.2f L left in the tank",
      s.order, s.tank, s.volume_before, s.abv_before, s.bottles, s.bottle_l, s.remainder_l20)
  end
end
p("Water for the day: %.1f L at 20 °C", total_water)
p("")
p("Written: %s, %s, %s", tanks_csv, plan_csv, chart_svg)
p("")
p([[Cautions: these are calculations from the OIML R 22 reference equation, not
certified measurements. Excise, duty and labelling declarations must use the
tables, instruments and procedures your authority prescribes; local regulations
and licensed practice take precedence. Strength here is true strength at 20 °C,
and hydrometer corrections assume standard glass. High-strength ethanol is
flammable: these plans say nothing about safe handling.]])
