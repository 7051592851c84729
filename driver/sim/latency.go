package sim

import (
	"context"

	"rolloff/driver/sim/scpiserver"
)

// maxQueryLatencyS bounds a meter's simulated query latency.
const maxQueryLatencyS = 10

// latencyS returns the meter's query latency, model seconds.
func (m *meter) latencyS() float64 {
	if m.kind == dcMeter {
		return m.b.cfg.Voltmeter.QueryLatencyS
	}
	return m.b.cfg.DMM.QueryLatencyS
}

// queryLatency delays a reading's answer by the meter's query latency
// (voltmeter.query_latency_s, dmm.query_latency_s): a plain meter's
// trigger, conversion and transfer, which a sweep reading single values
// pays at every reading.
func (m *meter) queryLatency(ctx context.Context) error {
	d := m.latencyS()
	if d <= 0 {
		return nil
	}
	if err := m.b.sleepUntil(ctx, m.b.now()+d); err != nil {
		return scpiserver.Errorf(scpiserver.ExecutionError, "measurement aborted")
	}
	return nil
}
