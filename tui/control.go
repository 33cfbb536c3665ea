package tui

// control is a request from the screen to a replay: pause (1) or resume (-1), change the
// speed, step ahead by some seconds while paused, or seek by some seconds.
type control struct {
	pause    int
	speed    float64
	setSpeed bool
	step     float64
	seek     float64
}

// control hands c to the replay goroutine without blocking the screen; live sources
// ignore it.
func (p *Pipeline) control(c control) {
	if p.ctl == nil {
		return
	}
	select {
	case p.ctl <- c:
	default:
	}
}
