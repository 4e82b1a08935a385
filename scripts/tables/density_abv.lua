-- Density ↔ strength at 20 °C for ethanol–water, from the reference
-- equation (OIML R 22), as two sheets written to CSV under out/:
--
--   out/density_from_abv_20C.csv   abv (% vol) → density (kg/m³) and abm (% mass)
--   out/abv_from_density_20C.csv   density (kg/m³) → abv (% vol) and abm (% mass)
--
-- Usage: meniscus run scripts/tables/density_abv.lua [abv_step] [density_step]
--   abv_step      % vol between rows of the first table (default 0.1)
--   density_step  kg/m³ between rows of the second table (default 0.5)

m = mixture.ethanol_water()
local abv_step = tonumber(arg[1]) or 0.1
local rho_step = tonumber(arg[2]) or 0.5
files.mkdir("out")

-- Values as whole multiples of the step (i * step, not a running sum), so
-- that 0.3 is written 0.3 and not 0.30000000000000004.
local function steps(from, to, step)
  local out, n = {}, math.floor((to - from) / step + 1e-9)
  for i = 0, n do out[#out + 1] = (from / step + i) * step end
  return out
end
local function clean(xs)
  for i, x in ipairs(xs) do xs[i] = tonumber(string.format("%.10g", x)) end
  return xs
end

-- % vol → density
local by_abv = sheet.new{}
by_abv:set_column("abv", clean(steps(0, 100, abv_step)))
by_abv:formula("density", "m:density{abv = abv, t = 20}")
by_abv:formula("abm", "m:convert{abv = abv}.abm")
by_abv:write_csv("out/density_from_abv_20C.csv")

-- density → % vol, from a little above pure ethanol to a little below water
local lo = math.ceil(m:density{abv = 100, t = 20} / rho_step) * rho_step
local hi = math.floor(m:density{abv = 0, t = 20} / rho_step) * rho_step
local by_density = sheet.new{}
by_density:set_column("density", clean(steps(lo, hi, rho_step)))
by_density:formula("abv", "m:strength{density = density, t = 20}.abv")
by_density:formula("abm", "m:strength{density = density, t = 20}.abm")
by_density:write_csv("out/abv_from_density_20C.csv")

print(("density at 20 °C for %d strengths, 0 to 100 %% vol in steps of %g:"):format(by_abv:nrows(), abv_step))
print(by_abv)
print()
print(("strength for %d densities, %g to %g kg/m³ in steps of %g:"):format(by_density:nrows(), lo, hi, rho_step))
print(by_density)
print()
print("written: out/density_from_abv_20C.csv, out/abv_from_density_20C.csv")
print([[
Cautions: these tables are calculated from the OIML R 22 reference equation
for ethanol–water at 20 °C; they are not the official alcoholometric tables.
A density does not identify a strength when the liquid holds anything but
ethanol and water (sugar, extract, other alcohols). For excise, labelling or
any legal declaration use the tables, instruments and procedures your
authority prescribes, and follow local regulations. High-strength ethanol is
flammable.]])
