// Package store keeps measurement runs on disk so that a crash, a kill or
// a full disk loses nothing that was reported as measured.
//
// A store is a directory of runs; each run is a directory named by its id
// (e.g. "20261201-184512-line-driver", UTC time of creation and a slug of
// the run's name) holding:
//
//	plan.toml | plan.json  the plan as given (raw bytes)
//	bench.toml             the bench file as given (raw bytes), when there is one
//	meta.json              id, name, times, state, instrument identities, plan
//	                       summary; replaced atomically (temp file in the run
//	                       directory, fsync, rename, fsync of the directory)
//	points.jsonl           one point.Point per line, appended and fsynced before
//	                       AppendPoint returns
//	events.jsonl           one event.Event per line; state, prompt and result
//	                       events are fsynced
//	lock                   the owner's lock (see below); holds its pid
//	result.json, response.csv, response.png, ...
//	                       files written on completion with WriteFileAtomic
//
// Ownership: the process running a run holds an exclusive flock(2) on its
// lock file for as long as it has the run open for writing (Create returns
// a run so locked; OpenRun then Lock takes it, e.g. to resume). The kernel
// drops the lock when the process exits, even on SIGKILL, so a run whose
// meta state is not final (preparing, settling, reading, paused,
// waiting-for-operator, queued) and whose lock nobody holds was abandoned:
// OpenRun marks it interrupted (in meta.json and events.jsonl) and List
// reports it so.
//
// Recovery: opening a run without a live owner scans points.jsonl and
// events.jsonl. A torn last line (no newline, or invalid JSON at the very
// end) was never acknowledged and is cut, and the number of bytes cut is
// logged and reported in Recovery. An invalid line before the end is
// measured data gone bad: it is an error naming the file and line, never
// dropped silently.
//
// One goroutine may write a run while others read it (Points, Events,
// Meta, OpenFile).
package store
