package analysis

// zoom returns the last n steady samples of s (ticks, counts, drive); when the steady
// part holds fewer than two (a segment that never reached its setpoint, or one of the
// short segments of a moving setpoint), the last of the segment's first stepKeep
// samples instead.
func (s *segState) zoom(n int) ZoomTrace {
	if s.sn < 2 {
		k := int(min(s.n, stepKeep))
		from := max(0, k-n)
		z := ZoomTrace{Segment: s.index, T: make([]float64, k-from), PV: make([]float64, k-from), U: make([]float64, k-from)}
		for i := from; i < k; i++ {
			z.T[i-from], z.PV[i-from], z.U[i-from] = s.stepT[i], s.stepPV[i], float64(s.stepU[i])
		}
		return z
	}
	m := int(min(s.sn, int64(len(s.ring)), int64(n)))
	z := ZoomTrace{Segment: s.index, T: make([]float64, m), PV: make([]float64, m), U: make([]float64, m)}
	for i := 0; i < m; i++ {
		r := s.ringAt(i, m)
		z.T[i], z.PV[i], z.U[i] = r.t, r.pv, float64(r.u)
	}
	return z
}

// overview is a min/max envelope of the whole stream in at most cap buckets: when full,
// neighbouring buckets merge and each bucket covers twice as many samples. The open
// bucket lives in scalars, so a sample costs a few comparisons.
type overview struct {
	capN        int
	width, fill int64
	t, sp, sum  []float64
	lo, hi      []float64
	cnt         []float64

	open                          bool
	ct, csp, csum, clo, chi, ccnt float64
}

func (o *overview) init(n int) {
	o.capN, o.width = n, 1
	o.t = make([]float64, 0, n)
	o.sp = make([]float64, 0, n)
	o.sum = make([]float64, 0, n)
	o.lo = make([]float64, 0, n)
	o.hi = make([]float64, 0, n)
	o.cnt = make([]float64, 0, n)
}

func (o *overview) add(t, sp, pv float64) {
	if o.open && o.fill < o.width {
		o.csp = sp
		o.csum += pv
		o.ccnt++
		if pv < o.clo {
			o.clo = pv
		}
		if pv > o.chi {
			o.chi = pv
		}
		o.fill++
		return
	}
	if o.open {
		o.flush()
	}
	o.open = true
	o.ct, o.csp, o.csum, o.clo, o.chi, o.ccnt = t, sp, pv, pv, pv, 1
	o.fill = 1
}

// flush closes the open bucket into the arrays, merging pairs when they are full.
func (o *overview) flush() {
	if len(o.t) == o.capN-1 {
		// The open bucket makes the last one: merge to keep the total within capN.
		o.t = append(o.t, o.ct)
		o.sp = append(o.sp, o.csp)
		o.sum = append(o.sum, o.csum)
		o.lo = append(o.lo, o.clo)
		o.hi = append(o.hi, o.chi)
		o.cnt = append(o.cnt, o.ccnt)
		h := o.capN / 2
		for i := 0; i < h; i++ {
			j, k := 2*i, 2*i+1
			o.t[i] = o.t[j]
			o.sp[i] = o.sp[k]
			o.sum[i] = o.sum[j] + o.sum[k]
			o.lo[i] = min(o.lo[j], o.lo[k])
			o.hi[i] = max(o.hi[j], o.hi[k])
			o.cnt[i] = o.cnt[j] + o.cnt[k]
		}
		o.t, o.sp, o.sum, o.lo, o.hi, o.cnt = o.t[:h], o.sp[:h], o.sum[:h], o.lo[:h], o.hi[:h], o.cnt[:h]
		o.width *= 2
		o.open = false
		return
	}
	o.t = append(o.t, o.ct)
	o.sp = append(o.sp, o.csp)
	o.sum = append(o.sum, o.csum)
	o.lo = append(o.lo, o.clo)
	o.hi = append(o.hi, o.chi)
	o.cnt = append(o.cnt, o.ccnt)
	o.open = false
}

// each calls fn for every bucket, the open one last.
func (o *overview) each(fn func(t, sp, mean, lo, hi float64)) {
	for i := range o.t {
		fn(o.t[i], o.sp[i], o.sum[i]/o.cnt[i], o.lo[i], o.hi[i])
	}
	if o.open {
		fn(o.ct, o.csp, o.csum/o.ccnt, o.clo, o.chi)
	}
}
