package virtual_test

import (
	"context"
	"fmt"
	"os"

	"github.com/caploop/caploop/analysis/loop/virtual"
)

// A board of the demo scenario with a wider deadband, five samples as fast as possible.
func ExampleBoard_Run() {
	sc := virtual.DefaultScenario()
	if err := sc.Set("deadband", "9"); err != nil {
		fmt.Println(err)
		return
	}
	sc.Samples = 5
	b, err := virtual.NewBoard(sc)
	if err != nil {
		fmt.Println(err)
		return
	}
	if err := b.Run(context.Background(), os.Stdout, false); err != nil {
		fmt.Println(err)
	}
	// Output:
	// # virtual board boot
	// # vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=9
	// # supply=5 r=47000 c=1e-06 load=1000000
	// t=0 n=0 sp=246 pv=0 u=1
	// t=1000 n=1 sp=246 pv=22 u=1
	// t=2000 n=2 sp=246 pv=42 u=1
	// t=3000 n=3 sp=246 pv=64 u=1
	// t=4000 n=4 sp=246 pv=84 u=1
}

// Host lines go in with Send and are answered before the next sample.
func ExampleBoard_Send() {
	sc := virtual.DefaultScenario()
	sc.Samples = 1
	b, _ := virtual.NewBoard(sc)
	b.Send("set mode=two-state")
	b.Send("set volume=11")
	b.Run(context.Background(), os.Stdout, false)
	// Output:
	// # virtual board boot
	// # vref=5 adc_bits=10 period_us=1000 mode=three-state deadband=4
	// # supply=5 r=47000 c=1e-06 load=1000000
	// # mode=two-state
	// # error: unknown key "volume", want deadband, mode, period_us or sp
	// t=0 n=0 sp=246 pv=0 u=1
}
