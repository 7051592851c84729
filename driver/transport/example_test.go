package transport_test

import (
	"bufio"
	"context"
	"fmt"
	"net"
	"time"

	"rolloff/driver/transport"
)

func ExampleParseAddress() {
	for _, s := range []string{"tcp://192.168.1.20", "serial:///dev/ttyUSB0?baud=115200", "serial:///dev/ttyUSB0?parity=N"} {
		a, err := transport.ParseAddress(s)
		if err != nil {
			fmt.Println(err)
			continue
		}
		fmt.Println(a)
	}
	// Output:
	// tcp://192.168.1.20:5025
	// serial:///dev/ttyUSB0?baud=115200&bits=8&parity=none&stop=1&flow=none
	// transport: address "serial:///dev/ttyUSB0?parity=N": parity "N" not allowed; allowed: none, odd, even, mark, space
}

func ExampleOpen() {
	// A stand-in instrument on loopback.
	ln, _ := net.Listen("tcp", "127.0.0.1:0")
	defer ln.Close()
	go func() {
		c, _ := ln.Accept()
		defer c.Close()
		r := bufio.NewReader(c)
		r.ReadString('\n')
		fmt.Fprint(c, "rolloff,SIM-GEN,0001,1.0\n")
	}()

	ctx := context.Background()
	conn, err := transport.Open(ctx, "tcp://"+ln.Addr().String(), transport.Opts{Timeout: time.Second})
	if err != nil {
		fmt.Println(err)
		return
	}
	defer conn.Close()
	conn.Write(ctx, []byte("*IDN?"))
	resp, err := conn.Read(ctx)
	fmt.Printf("%s %v\n", resp, err)
	// Output:
	// rolloff,SIM-GEN,0001,1.0 <nil>
}
