package virtual

import (
	"fmt"
	"strconv"
	"strings"

	"github.com/caploop/caploop/telemetry"
)

// AcceptsLine is the last line of the board's answer to `info`: the keys its `set`
// command takes (see telemetry.Meta.Accepts).
const AcceptsLine = "# accepts=sp,mode,deadband,period_us"

// readHost runs the host lines that arrived since the last sample.
func (b *Board) readHost() {
	b.mu.Lock()
	q := b.queue
	b.queue = nil
	b.mu.Unlock()
	for _, l := range q {
		b.exec(l)
	}
}

// exec runs one host line and writes the answer.
//
//	set deadband=9          -> # deadband=9
//	set mode=two-state      -> # mode=two-state
//	set period_us=500       -> # period_us=500
//	set sp=600 / sp=auto    -> # setpoint 600 held / # setpoint follows the profile
//	info                    -> the meta lines again and # accepts=sp,mode,deadband,period_us
//
// A bad line gets "# error: ..." (a comment, no key=value pairs in it).
func (b *Board) exec(line string) {
	fields := strings.Fields(line)
	if len(fields) == 0 {
		return
	}
	switch strings.ToLower(fields[0]) {
	case "info", "?":
		b.out = b.appendMetaLines(b.out)
		b.out = append(b.out, AcceptsLine...)
		b.out = append(b.out, '\n')
		b.event(EvSet, "info")
		return
	case "set":
	default:
		b.reject("unknown command " + word(fields[0]) + ", want set or info")
		return
	}
	if len(fields) == 1 {
		b.reject("set wants key=value")
		return
	}
	var m telemetry.Meta
	for _, kv := range fields[1:] {
		k, v, ok := strings.Cut(kv, "=")
		if !ok {
			b.reject("set wants key=value, got " + word(kv))
			continue
		}
		switch strings.ToLower(k) {
		case "deadband", "db":
			x, err := strconv.Atoi(v)
			if err != nil || x < 0 || x > b.sc.FullScale() {
				b.reject(fmt.Sprintf("deadband wants a whole number of counts 0 to %d", b.sc.FullScale()))
				continue
			}
			b.deadband = x
			b.sim.SetDeadband(x)
			m.Set |= telemetry.FieldDeadband
		case "mode":
			md, err := parseMode(v)
			if err != nil {
				b.reject("mode wants two-state or three-state")
				continue
			}
			b.mode = md
			if err := b.sim.SetController(controllerFor(md, b.deadband)); err != nil {
				b.reject("mode " + word(v) + " refused")
				continue
			}
			m.Set |= telemetry.FieldMode
		case "period_us", "period":
			x, err := strconv.ParseFloat(v, 64)
			if err != nil || !(x >= 50 && x <= 1e6) {
				b.reject("period_us wants microseconds 50 to 1000000")
				continue
			}
			cfg := b.sim.Config()
			cfg.Period = x * 1e-6
			cfg.Jitter = min(cfg.Jitter, cfg.Period/4)
			if err := b.sim.SetConfig(cfg); err != nil {
				b.reject("period_us refused")
				continue
			}
			m.Set |= telemetry.FieldPeriod
		case "sp", "setpoint":
			if strings.EqualFold(v, "auto") {
				b.spOverride = -1
				b.answer("# setpoint follows the profile")
				continue
			}
			x, err := strconv.Atoi(v)
			if err != nil || x < 0 || x > b.sc.FullScale() {
				b.reject(fmt.Sprintf("sp wants counts 0 to %d or auto", b.sc.FullScale()))
				continue
			}
			b.spOverride = x
			b.answer("# setpoint " + strconv.Itoa(x) + " held")
		default:
			b.reject("unknown key " + word(k) + ", want deadband, mode, period_us or sp")
		}
	}
	if m.Set != 0 {
		full := b.meta()
		full.Set = m.Set
		b.answer(string(telemetry.AppendMeta(nil, full)))
	}
}

func (b *Board) answer(s string) {
	b.out = append(b.out, s...)
	b.out = append(b.out, '\n')
	b.event(EvSet, s)
}

func (b *Board) reject(reason string) {
	s := "# error: " + reason
	b.out = append(b.out, s...)
	b.out = append(b.out, '\n')
	b.event(EvRejected, s)
}

// word returns at most 24 bytes of s made of letters, digits, '_', '-' and '.', quoted,
// so that host text echoed in an answer can never carry control bytes or an '='.
func word(s string) string {
	var sb strings.Builder
	for i := 0; i < len(s) && sb.Len() < 24; i++ {
		c := s[i]
		if c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= '0' && c <= '9' || c == '_' || c == '-' || c == '.' {
			sb.WriteByte(c)
		} else {
			sb.WriteByte('?')
		}
	}
	return `"` + sb.String() + `"`
}
