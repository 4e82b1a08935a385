-- Regenerates demo-data/solvent_densities.csv: INVENTED density
-- measurements of 2-propanol–water for the fictional Fenwick Reach
-- Solvents QA lab. The "true" mixture behind them is a model chosen here
-- (nothing was measured):
--   pure 2-propanol  ρ₁(t) = 785.09 − 0.7950 (t − 20) − 0.00110 (t − 20)² kg/m³
--                    (coefficients chosen to resemble handbook values, from memory)
--   pure water       the ethanol–water reference model at w = 0 (OIML R 22)
--   excess volume    V^E = x(1−x) Σ A_k(t) (2x−1)^k, A_k(t) = a_k + b_k (t − 25 °C),
--                    coefficients below (invented, of the size seen for
--                    alcohol–water systems)
-- Each reading gets Gaussian noise of 0.05 kg/m³ and is rounded to 0.01 kg/m³;
-- the lab states that 0.05 kg/m³ as the standard uncertainty of each
-- reading (column u_density_kg_m3). The sample compositions scatter by about 0.1 % mass around the nominal
-- ones, as freshly weighed samples would. Fixed seed: the file is
-- reproducible.
--
--   meniscus run scripts/make_solvent_demo.lua

local M1, M2 = 60.096, 18.015          -- g/mol, 2-propanol and water
local A = { -3.42, 1.95, -1.30, 0.85, -0.45 }   -- cm³/mol at 25 °C
local B = { 0.0085, -0.0040, 0.0020, 0.0, 0.0 } -- cm³/mol/K

local water = mixture.ethanol_water()

local function rho_ipa(t)
  local d = t - 20
  return 785.09 - 0.7950 * d - 0.00110 * d * d
end

local function density(abm, t)
  local w = abm / 100
  local n1, n2 = w / M1, (1 - w) / M2
  local x = n1 / (n1 + n2)
  local mbar = x * M1 + (1 - x) * M2
  local v1 = 1000 * M1 / rho_ipa(t)
  local v2 = 1000 * M2 / water:density{ w = 0, t = t }
  local z, zk, sum = 2 * x - 1, 1, 0
  for k = 1, #A do
    sum = sum + (A[k] + B[k] * (t - 25)) * zk
    zk = zk * z
  end
  local vm = x * v1 + (1 - x) * v2 + x * (1 - x) * sum
  return 1000 * mbar / vm
end

math.randomseed(4711)
local function gauss()
  local u1, u2 = math.random(), math.random()
  if u1 < 1e-300 then u1 = 1e-300 end
  return math.sqrt(-2 * math.log(u1)) * math.cos(2 * math.pi * u2)
end

-- The pure components are read twice at each temperature (two bottles).
local nominal = { 0, 0, 4, 8, 12, 16, 20, 30, 40, 50, 60, 70, 80, 88, 94, 100, 100 }
local lines = { "sample,ipa_pct_mass,t_c,density_kg_m3,u_density_kg_m3" }
for _, t in ipairs({ 15, 25, 35 }) do
  for i, c in ipairs(nominal) do
    local abm = c
    if c > 0 and c < 100 then
      abm = c + 0.1 * gauss()
      abm = math.floor(abm * 100 + 0.5) / 100
    end
    local rho = density(abm, t) + 0.05 * gauss()
    lines[#lines + 1] = string.format("FR-%02d-%02d,%.2f,%.2f,%.2f,0.05", t, i, abm, t, rho)
  end
end
files.write("demo-data/solvent_densities.csv", table.concat(lines, "\n") .. "\n")
print(string.format("wrote %d rows to demo-data/solvent_densities.csv", #lines - 1))
