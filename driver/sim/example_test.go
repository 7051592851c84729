package sim_test

import (
	"bufio"
	"context"
	"fmt"
	"net"
	"strings"

	"rolloff/driver/sim"
)

// Start the demo bench and ask the generator who it is over a raw socket.
func Example() {
	b, err := sim.New(sim.DemoConfig())
	if err != nil {
		fmt.Println(err)
		return
	}
	defer b.Close()
	if err := b.Start(context.Background()); err != nil {
		fmt.Println(err)
		return
	}
	c, err := net.Dial("tcp", strings.TrimPrefix(b.Addr(sim.RoleGenerator), "tcp://"))
	if err != nil {
		fmt.Println(err)
		return
	}
	defer c.Close()
	fmt.Fprint(c, "*IDN?\n")
	idn, _ := bufio.NewReader(c).ReadString('\n')
	fmt.Print(idn)
	lo, hi := b.DUTCorners(-3)
	fmt.Printf("-3 dB corners: %.2f Hz, %.1f kHz\n", lo, hi/1e3)
	// Output:
	// rolloff,SIM-GEN-1,0001,1.0
	// -3 dB corners: 8.02 Hz, 94.9 kHz
}
