-- wrk script: POST /v1/score with an invented ~1 KB shop message.
-- Usage: wrk -t2 -c64 -d30s -s scripts/score.lua http://127.0.0.1:7300
wrk.method = "POST"
wrk.path = "/v1/score"
wrk.headers["Content-Type"] = "application/json"
local body = "Hello, I ordered a set of four stoneware bowls two weeks ago and the tracking page " ..
  "still says the parcel is waiting at the depot. Could you check with the courier? The order " ..
  "number is 44120 and it was paid by card. I also wanted to ask whether the sea-green glaze " ..
  "will be back in stock before the spring market, because my sister would like matching " ..
  "plates for her kitchen. If the bowls are lost, a replacement would be fine, or a refund " ..
  "if that is easier for you. Thank you for the lovely teapot last year, it is still in use " ..
  "every morning. Kind regards, Ines. PS: the link in your newsletter to the workshop dates " ..
  "did not open for me; is the Saturday weaving class still running in March? Thanks again " ..
  "and have a good week, the whole co-operative team does wonderful work."
wrk.body = '{"subject":"Where is order 44120?","sender":"ines@customer.example.org","body":"' .. body .. '"}'
