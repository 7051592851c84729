// Package web is the daemon's HTTP face: a JSON API to start, follow and
// steer sweeps on one bench, a websocket that streams each run live, the
// embedded page, and the locking rules that keep all of it to its owner.
//
// Routes (JSON; errors are {"error": "...", "field": "..."} with a 4xx
// status):
//
//	GET  /api/bench                     instruments, roles, identities, limits, converter ranges
//	GET  /api/runs                      every run, newest first (?unit=U&batch=B: those of a unit, a batch)
//	POST /api/runs                      a plan (JSON, the plan file's fields) or
//	                                    {"plan_toml": "...", "file_name": "..."}; 201 {"id": ...}
//	POST /api/plan/estimate             points and duration of a plan, before starting it
//	GET  /api/runs/{id}                 state, progress, ETA, pending prompt, result
//	POST /api/runs/{id}/pause|resume|abort   body {} or none; resume continues an
//	                                    interrupted run from the store
//	POST /api/runs/{id}/confirm         {"prompt_id": n, "range_index": i}
//	GET  /api/runs/{id}/points          stored points (?from_seq=n)
//	GET  /api/runs/{id}/files/{name}    response.csv, result.json, response.png|svg|pdf, report.pdf
//	GET  /api/overlay.png|svg|pdf       ?runs=a,b[&diff=1]
//	GET  /api/runs/{id}/live            websocket: event.Event JSON messages; on
//	                                    connect the run so far, then every event; a
//	                                    last {"type":"closing"} before a shutdown
//
// Locking: requests whose Host is not the daemon's own address, localhost
// or a loopback literal are refused (403) before routing; POST requests
// and websocket upgrades must come from the daemon's own Origin or none
// (403); state changes are POST with application/json only (405, 415);
// bodies are limited to 1 MiB (413); no CORS header is ever sent. A
// daemon listening on anything but loopback requires a token (header
// X-Rolloff-Token, or the websocket subprotocol "rolloff-token.T"), which
// the page gets from a one-time link (/?once=...) or, over loopback, with
// the page itself.
package web
