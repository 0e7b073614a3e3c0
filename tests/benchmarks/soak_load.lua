-- Mixed cold load for tests/benchmarks/soak.py: every request is built here, with a fresh
-- seeded series, so none is a cache hit. One connection per wrk thread, so request() and
-- response() alternate and `current` is the request a response answers.
--
-- Counts go to the thread's `counts` ("kind status" -> n) and the first unexpected answers
-- to `unexpected`; done() prints them for the Python side to parse.

local threads = {}
local current = nil
local made = 0
counts = {}
unexpected = {}

local FAMILIES = {"ets", "arima", "theta", "seasonal_naive", "drift", "naive", "mean"}
local JSON = {["Content-Type"] = "application/json"}

function setup(thread)
  thread:set("id", #threads + 1)
  table.insert(threads, thread)
end

function init(args)
  math.randomseed(tonumber(os.getenv("WINDVANE_SOAK_SEED") or "1") * 1000 + id)
end

-- A monthly series: level, trend, a yearly season and noise, all drawn afresh.
local function values(n)
  local level = 80 + math.random() * 100
  local slope = math.random() * 0.8 - 0.2
  local amplitude = math.random() * 20
  local out = {}
  for t = 0, n - 1 do
    local noise = (math.random() + math.random() + math.random() - 1.5) * 4
    out[#out + 1] = level + slope * t + amplitude * math.sin(2 * math.pi * t / 12) + noise
  end
  -- The thread id and a counter make the series distinct even if two draws matched.
  made = made + 1
  out[n] = out[n] + id * 1e-3 + made * 1e-7
  return out
end

local function numbers(list)
  local parts = {}
  for i, v in ipairs(list) do parts[i] = string.format("%.7f", v) end
  return "[" .. table.concat(parts, ",") .. "]"
end

local function series(n)
  return '{"start":"2010-01-01","frequency":"MS","values":' .. numbers(values(n)) .. '}'
end

local function csv(n)
  local rows = {"timestamp,value"}
  for t, v in ipairs(values(n)) do
    rows[#rows + 1] = string.format("%04d-%02d-01,%.7f", 2010 + math.floor((t - 1) / 12), (t - 1) % 12 + 1, v)
  end
  return table.concat(rows, "\n") .. "\n"
end

local function family()
  return FAMILIES[math.random(#FAMILIES)]
end

local function forecast_body(model)
  return '{"series":' .. series(math.random(72, 144)) .. ',"horizon":12,"coverage":[0.8,0.95],'
    .. '"model":' .. model .. '}'
end

-- Each kind: a weight, and a function returning path, headers, body, expected status and
-- (optionally) a Lua pattern the answer must match and one it must not.
local BAD = {
  {"horizon-zero", 422, function() return "/v1/forecasts", JSON,
    '{"series":' .. series(48) .. ',"horizon":0,"model":"naive"}' end},
  {"json-cut-short", 400, function() return "/v1/forecasts", JSON, '{"series": {"values": [1, 2,' end},
  {"unknown-family", 422, function() return "/v1/forecasts", JSON,
    '{"series":' .. series(48) .. ',"horizon":3,"model":{"family":"no_such_family"}}' end},
  {"text-plain-body", 415, function() return "/v1/forecasts", {["Content-Type"] = "text/plain"},
    '{"series":' .. series(48) .. ',"horizon":3}' end},
  {"string-among-values", 422, function() return "/v1/forecasts", JSON,
    '{"series":{"start":"2010-01-01","frequency":"MS","values":[1,"two",3]},"horizon":3}' end},
  {"accept-gif", 406, function() return "/v1/forecasts",
    {["Content-Type"] = "application/json", ["Accept"] = "image/gif"},
    '{"series":' .. series(48) .. ',"horizon":3,"model":"naive"}' end},
  {"csv-word-for-a-number", 422, function() return "/v1/forecasts?horizon=3&model=naive",
    {["Content-Type"] = "text/csv"}, "timestamp,value\n2010-01-01,1\n2010-02-01,abc\n" end},
  {"unknown-key", 422, function() return "/v1/forecasts", JSON,
    '{"series":' .. series(48) .. ',"horizon":3,"surprise":1}' end},
  {"coverage-above-one", 422, function() return "/v1/forecasts", JSON,
    '{"series":' .. series(48) .. ',"horizon":3,"coverage":[1.5]}' end},
  {"horizon-too-long", 422, function() return "/v1/forecasts", JSON,
    '{"series":' .. series(48) .. ',"horizon":100000}' end},
  {"diagnostics-of-two-points", 422, function() return "/v1/diagnostics", JSON,
    '{"series":{"start":"2010-01-01","frequency":"MS","values":[1,2]}}' end},
  {"empty-batch", 422, function() return "/v1/forecast-batches", JSON, '{"requests":[]}' end},
  {"array-body", 422, function() return "/v1/forecasts", JSON, '[1,2]' end},
  {"year-1700-on-a-minute-grid", 422, function() return "/v1/forecasts", JSON,
    '{"series":{"timestamps":["1700-01-01","2000-01-01","2200-01-01"],"values":[1,2,3],'
    .. '"frequency":"PT1M"},"horizon":3}' end},
}

local KINDS = {
  {"forecast-explicit", 25, function()
    return "/v1/forecasts", JSON, forecast_body('{"family":"' .. family() .. '"}'), 200 end},
  {"forecast-auto", 8, function() return "/v1/forecasts", JSON, forecast_body('"auto"'), 200 end},
  {"diagnostics", 12, function()
    return "/v1/diagnostics", JSON, '{"series":' .. series(math.random(60, 144)) .. '}', 200 end},
  {"backtest", 8, function()
    return "/v1/backtests", JSON, '{"series":' .. series(math.random(72, 120))
      .. ',"horizon":6,"origins":3,"models":["naive","seasonal_naive","' .. family() .. '"]}', 200 end},
  {"forecast-csv", 12, function()
    return "/v1/forecasts?horizon=12&coverage=0.8,0.95&model=" .. family(),
      {["Content-Type"] = "text/csv", ["Accept"] = "text/csv"}, csv(math.random(60, 120)), 200,
      "^timestamp,point" end},
  {"batch", 8, function()
    local items = {}
    for i = 1, 4 do
      items[i] = '{"id":"item' .. i .. '","series":' .. series(math.random(48, 96))
        .. ',"horizon":6,"model":{"family":"' .. family() .. '"}}'
    end
    -- One item is wrong on purpose: it must be that item's 422, not the batch's.
    items[5] = '{"id":"wrong","series":' .. series(24) .. ',"horizon":0}'
    return "/v1/forecast-batches", JSON, '{"requests":[' .. table.concat(items, ",") .. ']}',
      200, '"status":%s*422', '"status":%s*5%d%d' end},
  {"bad", 15, nil},
}

local total = 0
for _, k in ipairs(KINDS) do total = total + k[2] end

local function pick()
  local r = math.random() * total
  for _, k in ipairs(KINDS) do
    r = r - k[2]
    if r <= 0 then return k end
  end
  return KINDS[1]
end

function request()
  local kind = pick()
  local path, headers, body, status, must, must_not
  local name = kind[1]
  if kind[3] == nil then
    local bad = BAD[math.random(#BAD)]
    name = "bad:" .. bad[1]
    status = bad[2]
    path, headers, body = bad[3]()
  else
    path, headers, body, status, must, must_not = kind[3]()
  end
  current = {name = name, status = status, must = must, must_not = must_not}
  return wrk.format("POST", path, headers, body)
end

function response(status, headers, body)
  if current == nil then return end
  local key = current.name .. " " .. status
  counts[key] = (counts[key] or 0) + 1
  local ok = status == current.status
  if ok and current.must and not string.find(body, current.must) then ok = false end
  if ok and current.must_not and string.find(body, current.must_not) then ok = false end
  if status >= 400 then
    local kind = headers["content-type"] or headers["Content-Type"] or ""
    if not string.find(kind, "application/problem+json", 1, true) then ok = false end
  end
  if not ok then
    counts["unexpected"] = (counts["unexpected"] or 0) + 1
    if #unexpected < 5 then
      unexpected[#unexpected + 1] = current.name .. " " .. status .. " "
        .. (string.gsub(string.sub(body, 1, 300), "\n", " "))
    end
  end
  current = nil
end

function done(summary, latency, requests)
  local e = summary.errors
  io.write(string.format("WRK %d %d %d %d %d %d %d %d %d\n", summary.requests, summary.duration,
    latency:percentile(50), latency:percentile(99), latency.max,
    e.connect, e.read, e.write, e.timeout))
  for _, thread in ipairs(threads) do
    for key, n in pairs(thread:get("counts")) do io.write("COUNT " .. key .. " " .. n .. "\n") end
    for _, text in ipairs(thread:get("unexpected")) do io.write("UNEXPECTED " .. text .. "\n") end
  end
end
