package scpi_test

import (
	"context"
	"errors"
	"fmt"

	"rolloff/driver"
	"rolloff/driver/scpi"
	"rolloff/driver/transport/replay"
)

func ExampleCompile() {
	t, err := scpi.Compile("generator.set_frequency", "SOUR:FREQ {freq_hz}")
	if err != nil {
		panic(err)
	}
	cmd, _ := t.Format(scpi.Num("freq_hz", 31.5))
	fmt.Println(cmd)
	_, err = t.Format(scpi.Word("freq_hz", "1;*RST"))
	fmt.Println(err)
	// Output:
	// SOUR:FREQ 31.5
	// scpi: profile key "generator.set_frequency": {freq_hz}: "1;*RST": refused: ';' would start another command
}

func ExampleParseNumber() {
	for _, resp := range []string{"+1.234500E-01", "+9.90000000E+37", "1.23E"} {
		v, err := scpi.ParseNumber(resp)
		switch {
		case errors.Is(err, driver.ErrOverload):
			fmt.Println("overload")
		case err != nil:
			fmt.Println(err)
		default:
			fmt.Println(v)
		}
	}
	// Output:
	// 0.12345
	// overload
	// scpi: response "1.23E": exponent without digits: driver: malformed response
}

// A session pinned by a transcript, as a dialect's tests do.
func ExampleSession() {
	tr, _ := replay.ParseString("example", `
> *IDN?
< rolloff,SIM-DMM,0002,1.0
> SYST:ERR?
< -113,"Undefined header"
> SYST:ERR?
< 0,"No error"
`)
	conn := replay.NewPlayback(tr)
	s := scpi.New(conn, nil)
	ctx := context.Background()
	id, _ := s.Identify(ctx)
	fmt.Println(id.Manufacturer, id.Model)
	errs, _ := s.DrainErrors(ctx)
	fmt.Println(errs)
	fmt.Println(s.Close())
	// Output:
	// rolloff SIM-DMM
	// [instrument error -113: Undefined header (command error)]
	// <nil>
}
