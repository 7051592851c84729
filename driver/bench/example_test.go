package bench_test

import (
	"context"
	"fmt"
	"time"

	"github.com/rs/zerolog"

	"rolloff/driver"
	"rolloff/driver/bench"
)

// ExampleOpenDemo opens the simulated demo bench, sets the generator and
// reads the converter through the DC voltmeter.
func ExampleOpenDemo() {
	ctx := context.Background()
	b, err := bench.OpenDemo(ctx, zerolog.Nop())
	if err != nil {
		fmt.Println(err)
		return
	}
	defer b.Close() // halts the generator first

	fmt.Println(b.Identities["generator"])
	rs := b.Converter.Ranges()
	fmt.Println(len(rs), "ranges,", rs[0].Name, "to", rs[len(rs)-1].Name)

	_ = b.Generator.SetFrequency(ctx, 1000)
	_ = b.Generator.SetAmplitude(ctx, 0.05)
	_ = b.Generator.SetOutput(ctx, true)
	if sw, ok := b.Converter.(driver.RangeSwitcher); ok {
		_ = sw.SwitchRange(ctx, 6) // "1 V"
	}
	// Let the converter settle: 12 time constants of model time.
	tau := rs[6].TimeConstantS
	time.Sleep(time.Duration(12 * tau / b.TimeScale * float64(time.Second)))
	dc, err := b.DCVoltmeter.ReadDC(ctx)
	if err != nil {
		fmt.Println(err)
		return
	}
	r, _ := b.Converter.Scale(6, dc)
	fmt.Println("status:", r.Status)
	// Output:
	// rolloff,SIM-GEN-1,0001,1.0
	// 12 ranges, 1 mV to 316.2 V
	// status: in-spec
}
