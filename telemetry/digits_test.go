package telemetry

import (
	"math/rand/v2"
	"strconv"
	"testing"
)

// TestDigits checks the eight-at-a-time digit reader against strconv on numbers of every
// length, followed by every kind of byte, at every offset, and with digits lying past
// the end of the slice (which must not count).
func TestDigits(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for n := 1; n <= 19; n++ {
		for range 200 {
			num := []byte(strconv.FormatUint(rng.Uint64N(1<<63), 10))
			if len(num) > n {
				num = num[:n]
			}
			want, _ := strconv.ParseUint(string(num), 10, 64)
			for _, tail := range []string{"", " ", "x", "\n", "\xff", "/", ":", "9999999999"} {
				pre := rng.IntN(4)
				buf := make([]byte, 0, 64)
				buf = append(buf, []byte("xx=")[:pre]...)
				buf = append(buf, num...)
				full := append(buf, tail...)
				cases := [][]byte{full, buf} // buf: the tail lies past len, in its capacity
				if tail == "9999999999" {
					cases = cases[1:] // in full, the tail would be part of the number
				}
				for _, b := range cases {
					got, end := digits(b, pre)
					if got != want || end != pre+len(num) {
						t.Fatalf("digits(%q [len %d], %d) = %d, %d; want %d, %d", full, len(b), pre, got, end, want, pre+len(num))
					}
					got, end = digits8(b, pre)
					if got != want || end != pre+len(num) {
						t.Fatalf("digits8(%q [len %d], %d) = %d, %d; want %d, %d", full, len(b), pre, got, end, want, pre+len(num))
					}
				}
			}
		}
	}
	if v, end := digits([]byte("abc"), 1); v != 0 || end != 1 {
		t.Errorf("digits(no digits) = %d, %d, want 0, 1", v, end)
	}
}
