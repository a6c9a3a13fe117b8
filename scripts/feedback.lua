-- wrk script: POST /v1/feedback with inline invented messages, alternating
-- labels, each request a new message (a counter makes them distinct).
-- Usage: wrk -t2 -c32 -d30s -s scripts/feedback.lua http://127.0.0.1:7300
wrk.method = "POST"
wrk.path = "/v1/feedback"
wrk.headers["Content-Type"] = "application/json"
local n = 0
function request()
  n = n + 1
  local label = (n % 5 == 0) and "junk" or "fine"
  local body = '{"message":{"subject":"Order ' .. n .. '","body":"Parcel ' .. n ..
    ' has not arrived; please check the courier for glazed bowls and linen aprons."},' ..
    '"label":"' .. label .. '","moderator":"load-test"}'
  return wrk.format(nil, nil, nil, body)
end
