-- Contraction on mixing ethanol and water: the volume lost when given
-- volumes of pure ethanol and water (both at t °C) are mixed, from the
-- reference equation (OIML R 22). Two sheets, written to CSV under out/:
--
--   out/contraction_grid.csv  litres lost for 0–100 L ethanol × 0–100 L water
--                             (steps of 10 L; a row per ethanol volume)
--   out/contraction_100L.csv  e L of ethanol + (100 − e) L of water, e = 0…100:
--                             volume of the mixture, litres lost, % vol
--
-- Usage: meniscus run scripts/tables/contraction.lua [t]   (t in °C, default 20)

m = mixture.ethanol_water()
mix_t = tonumber(arg[1]) or 20
files.mkdir("out")

local tens = {}
for i = 0, 10 do tens[#tens + 1] = 10 * i end
local grid = sheet.grid{
  rows = {name = "ethanol_l", values = tens},
  cols = {name = "water_l", values = tens},
  fn = function(e, w)
    if e + w == 0 then return nil end   -- nothing mixed: no value
    return m:mix{v1 = e, v2 = w, t = mix_t}.contraction
  end,
  layout = "wide",
}
grid:write_csv("out/contraction_grid.csv")

local s = sheet.new{}
local e = {}
for i = 0, 100 do e[#e + 1] = i end
s:set_column("ethanol_l", e)
s:formula("water_l", "100 - ethanol_l")
s:formula("volume_l", "m:mix{v1 = ethanol_l, v2 = water_l, t = mix_t}.volume")
s:formula("contraction_l", "ethanol_l + water_l - volume_l")
-- % vol: ethanol volume per mixture volume, both at the mixing temperature
-- (at 20 °C this is the strength in % vol at 20 °C).
s:formula("abv", "100 * ethanol_l / volume_l")
s:write_csv("out/contraction_100L.csv")

print(("litres lost on mixing at %g °C (rows: ethanol L, columns: water L):"):format(mix_t))
print(grid)
print()
print("e L ethanol + (100 − e) L water:")
print(s)
local c = s:column("contraction_l")
local best, at = -1, 0
for i = 1, #c do if c[i] > best then best, at = c[i], i end end
print(("largest loss: %.2f L per 100 L, mixing %g L ethanol with %g L water (%.1f %% vol)"):format(
  best, s:get(at, "ethanol_l"), s:get(at, "water_l"), s:get(at, "abv")))
print("written: out/contraction_grid.csv, out/contraction_100L.csv")
print([[
Cautions: calculated from the OIML R 22 reference equation for pure ethanol
and water at one temperature; real lots are not pure and mixing warms the
liquid, so measure the result before relying on it. For excise, labelling or
any legal declaration use the tables, instruments and procedures your
authority prescribes, and follow local regulations. High-strength ethanol is
flammable.]])
