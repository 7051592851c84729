package web

import (
	"context"
	"io"
	"time"

	"rolloff/driver"
	"rolloff/sweep/plan"
	"rolloff/sweep/point"
	"rolloff/sweep/queue"
)

// Instrument is one bench instrument as GET /api/bench shows it.
type Instrument struct {
	Role      string          `json:"role"`
	Identity  driver.Identity `json:"identity"`
	Connected bool            `json:"connected"`
}

// BenchInfo is the body of GET /api/bench.
type BenchInfo struct {
	Name        string                 `json:"name,omitempty"`
	Simulated   bool                   `json:"simulated"`
	TimeScale   float64                `json:"time_scale"`
	LineHz      float64                `json:"line_hz,omitempty"`
	Roles       []string               `json:"roles"`
	Instruments []Instrument           `json:"instruments"`
	Limits      driver.GeneratorLimits `json:"limits"`
	Ranges      []driver.Range         `json:"converter_ranges,omitempty"`
	Window      *driver.Window         `json:"converter_window,omitempty"`
	Running     string                 `json:"running,omitempty"`
	Queued      int                    `json:"queued"`
}

// Estimate is the body of POST /api/plan/estimate.
type Estimate struct {
	Points          int        `json:"points"`
	RefineMaxPoints int        `json:"refine_max_points,omitempty"`
	DurationS       float64    `json:"duration_s"` // physical seconds
	TimeScale       float64    `json:"time_scale"` // physical seconds per wall second on this bench
	StartHz         float64    `json:"start_hz"`
	StopHz          float64    `json:"stop_hz"`
	Plan            *plan.Plan `json:"plan"` // with its defaults filled in
}

// backend is the bench, the scheduler and the run store as the server
// uses them; bridge.go implements it with the real packages.
type backend interface {
	queue.Backend
	Info() BenchInfo
	Limits() driver.GeneratorLimits
	// CheckThrough refuses a plan whose normalization run cannot be used.
	CheckThrough(p *plan.Plan) error
	Estimate(p *plan.Plan) (Estimate, error)
	Points(ctx context.Context, id string) ([]point.Point, error)
	// OpenFile opens an export of a run; name is already allowlisted.
	OpenFile(ctx context.Context, id, name string) (io.ReadSeekCloser, time.Time, error)
	Overlay(ctx context.Context, w io.Writer, format string, ids []string, diff bool) error
	// Confirmed is told that the operator confirmed a range (on the
	// simulated bench it moves the simulated range switch).
	Confirmed(rangeIndex int)
	// Halt switches the generator output off.
	Halt() error
}
