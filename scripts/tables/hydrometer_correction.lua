-- Temperature correction for a glass % vol hydrometer (calibrated at 20 °C):
-- the true strength (% vol at 20 °C) for every reading and liquid
-- temperature, from the reference equation (OIML R 22) and the glass's
-- expansion (25e-6 /K; see help "mixture:hydrometer"). Written to
-- out/hydrometer_correction.csv in wide form (a row per reading, a column
-- per temperature, named t=…) or, with "long", one row per pair.
--
-- Usage: meniscus run scripts/tables/hydrometer_correction.lua [reading_step] [t_step] [long]
--   reading_step  % vol between readings, 0 to 100 (default 0.1)
--   t_step        °C between temperatures, 0 to 40 (default 0.5)
-- The full table is 1001 readings × 81 temperatures = 81,081 inverse solves.

m = mixture.ethanol_water()
local reading_step = tonumber(arg[1]) or 0.1
local t_step = tonumber(arg[2]) or 0.5
local layout = arg[3] == "long" and "long" or "wide"
files.mkdir("out")

local function steps(from, to, step)
  local out, n = {}, math.floor((to - from) / step + 1e-9)
  for i = 0, n do out[#out + 1] = tonumber(string.format("%.10g", from + i * step)) end
  return out
end
local readings, temps = steps(0, 100, reading_step), steps(0, 40, t_step)

local gaps = 0
local function true_abv(reading, t)
  local ok, s = pcall(m.hydrometer, m, {abv = reading, t = t})
  if ok then return s.abv end
  -- A reading no liquid can give at that temperature (e.g. near 100 % vol
  -- when cold): no value, an empty cell.
  gaps = gaps + 1
  return nil
end

-- One bulk call per reading, over every temperature at once (much faster
-- than a call per point); a reading with a gap somewhere falls back to
-- point by point.
local function true_abv_row(reading, ts)
  local ok, s = pcall(m.hydrometer, m, {abv = reading, t = ts})
  if ok then return s.abv end
  local out = {}
  for j = 1, #ts do out[j] = true_abv(reading, ts[j]) end
  return out
end

local grid = {
  rows = {name = "reading", values = readings},
  cols = {name = "t", values = temps},
  fn = true_abv_row,
  vectorized = true,
  layout = layout,
}
if layout == "long" then grid.value = "abv" end
local table = sheet.grid(grid)
table:write_csv("out/hydrometer_correction.csv")

local points = #readings * #temps
print(("true strength (%% vol at 20 °C) for %d readings × %d temperatures = %d points, %s layout"):format(
  #readings, #temps, points, layout))
-- An excerpt: every 10 % vol at 10, 15, 20, 25 and 30 °C.
local excerpt = sheet.new{"reading"}
local shown_t = {10, 15, 20, 25, 30}
for _, t in ipairs(shown_t) do excerpt:set_column("t=" .. t, {}) end
for _, reading in ipairs({10, 20, 30, 40, 50, 60, 70, 80, 90}) do
  local row = {reading = reading}
  for _, t in ipairs(shown_t) do
    local ok, s = pcall(m.hydrometer, m, {abv = reading, t = t})
    row["t=" .. t] = ok and s.abv or ""
  end
  excerpt:add(row)
end
print(excerpt)
print(("%d points have no value (a reading no ethanol–water mixture gives at that temperature)"):format(gaps))
local r = m:hydrometer{abv = 40, t = 10}
print(("example: a reading of 40 %% vol at 10 °C is %.2f %% vol true strength"):format(r.abv))
print("written: out/hydrometer_correction.csv")
print([[
Cautions: calculated from the OIML R 22 reference equation and an assumed
glass expansion coefficient; surface tension and the instrument's own
calibration errors are ignored. Read hydrometers as their certificates say.
These are not the official correction tables: for excise, labelling or any
legal declaration use the tables, instruments and procedures your
authority prescribes, and follow local regulations. High-strength ethanol
is flammable.]])
