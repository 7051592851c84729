package event

import (
	"encoding/json"
	"time"
)

// progressJSON is Progress on the wire: the durations in wall seconds.
type progressJSON struct {
	Done     int     `json:"done"`
	Total    int     `json:"total"`
	FreqHz   float64 `json:"freq_hz"`
	ETAWallS float64 `json:"eta_s"`
	WallS    float64 `json:"elapsed_s"`
}

// MarshalJSON writes p with its durations as seconds.
func (p Progress) MarshalJSON() ([]byte, error) {
	return json.Marshal(progressJSON{Done: p.Done, Total: p.Total, FreqHz: p.FreqHz, ETAWallS: p.ETA.Seconds(), WallS: p.Elapsed.Seconds()})
}

// UnmarshalJSON reads what MarshalJSON writes.
func (p *Progress) UnmarshalJSON(data []byte) error {
	var j progressJSON
	if err := json.Unmarshal(data, &j); err != nil {
		return err
	}
	*p = Progress{Done: j.Done, Total: j.Total, FreqHz: j.FreqHz, ETA: WallSeconds(j.ETAWallS), Elapsed: WallSeconds(j.WallS)}
	return nil
}

// WallSeconds converts a number of wall seconds to a duration.
func WallSeconds(s float64) time.Duration { return time.Duration(s * float64(time.Second)) }
