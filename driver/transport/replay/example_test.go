package replay_test

import (
	"context"
	"fmt"

	"rolloff/driver/transport/replay"
)

func ExamplePlayback() {
	tr, err := replay.ParseString("example", "> *IDN?\n< rolloff,SIM-GEN,0001,1.0\n> SYST:ERR?\n< 0,\"No error\"\n")
	if err != nil {
		panic(err)
	}
	p := replay.NewPlayback(tr)
	ctx := context.Background()
	p.Write(ctx, []byte("*IDN?"))
	resp, _ := p.Read(ctx)
	fmt.Println(string(resp))
	fmt.Println(p.Write(ctx, []byte("SYST:ERR")))
	fmt.Println(p.Close() != nil)
	// Output:
	// rolloff,SIM-GEN,0001,1.0
	// replay: example:3: write differs at byte 8: want '?' (0x3f), got end of message (want "SYST:ERR?", got "SYST:ERR")
	// true
}
