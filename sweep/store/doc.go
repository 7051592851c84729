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
//	events.jsonl           one event.Event per line; state, prompt, result and
//	                       point events are fsynced
//	lock                   the owner's lock (see below); holds its pid
//	response.csv, result.json, response.png, response.svg, response.pdf
//	                       the result files (ResultFiles), rendered by the
//	                       export package on completion and written with
//	                       Run.WriteFileAtomic; other result files (.json,
//	                       .csv, .png, .svg, .pdf, .txt) may be added the
//	                       same way
//
// meta.json also records how many points were stored when its owner last
// wrote it and, once the run is done, its result's figures (Figures), so
// that a list of runs reads neither points.jsonl nor result.json.
//
// The store's index (Index, in .index/runs.jsonl) keeps every run's
// summary so that a daemon on a store of tens of thousands of runs lists
// them without reading them: it reads a run again only when the run's
// directory changed (meta.json and result files are replaced by rename,
// which moves the directory's modification time), or when the run is not
// in a final state. The index file is only a cache, written with the
// atomic writer; one missing, stale or damaged after a crash is repaired
// from the run directories when it is opened.
//
// The constants File* name these files; the other packages (export, the
// web API, the CLI) use them rather than spelling the names.
//
// Every whole-file write (meta.json, the plan and bench files when a run
// is created, result files, and WriteFileAtomic for a file outside a run)
// goes through one writer: a temporary file named ".tmp-<name>-…" in the
// same directory, fsynced, renamed over the name, then the directory
// fsynced. A crash leaves at most such a temporary file, which the
// recovery of the run removes.
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
// Recovery: opening a run without a live owner (OpenRun, or Lock to
// resume) scans points.jsonl and events.jsonl. A torn last line (bytes
// after the last newline, or an invalid last line with only blank lines
// after it) was never acknowledged and is cut, and the number of bytes cut
// is logged and reported in Recovery, as is the number of temporary files
// removed. An invalid line before the end, or a plan index stored twice,
// is measured data gone bad: it is a *CorruptError naming the file and
// line, never dropped silently. The same rule, without the cutting, is
// how every reader reads points back: ReadPoints, which Run.Points (for a
// handle that does not own the run) and the export package's LoadRun use.
//
// One goroutine may write a run while others read it (Points, Events,
// Meta, OpenFile); a reader leaves out a line still being written.
package store
