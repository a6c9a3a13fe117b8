-- Like score.lua, but each connection waits 4 ms between requests, so
-- 8 connections offer about 2,000 requests/s (for latency at a fixed load).
-- Usage: wrk -t2 -c8 -d30s --latency -s scripts/score_paced.lua http://127.0.0.1:7300
dofile((debug.getinfo(1, "S").source:sub(2):match("(.*/)") or "./") .. "score.lua")
function delay()
  return 4
end
