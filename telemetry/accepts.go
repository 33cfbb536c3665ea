package telemetry

import "strings"

// The accepts meta key lists the keys a board's `set` command takes, answered to `info`:
//
//	# accepts=sp,mode,deadband,period_us
//
// Each name is 1 to 32 bytes of lower-case letters, digits and '_'; at most 16 names.
const (
	maxAcceptName  = 32
	maxAcceptNames = 16
)

// AcceptsKey reports whether the board said (with accepts=) that `set` takes key.
func (m Meta) AcceptsKey(key string) bool {
	if !m.Has(FieldAccepts) {
		return false
	}
	for _, k := range strings.Split(m.Accepts, ",") {
		if k == key {
			return true
		}
	}
	return false
}

// addAccept appends the names in w (comma-separated) to m.Accepts and reports whether
// they were all well formed; on false m.Accepts is unchanged.
func (m *Meta) addAccept(w []byte) bool {
	n := 0
	if m.Accepts != "" {
		n = strings.Count(m.Accepts, ",") + 1
	}
	names := strings.Split(string(w), ",")
	for _, name := range names {
		if name == "" || len(name) > maxAcceptName {
			return false
		}
		for i := 0; i < len(name); i++ {
			c := name[i]
			if !(c >= 'a' && c <= 'z' || c >= '0' && c <= '9' || c == '_') {
				return false
			}
		}
	}
	if n+len(names) > maxAcceptNames {
		return false
	}
	if m.Accepts != "" {
		m.Accepts += ","
	}
	m.Accepts += strings.Join(names, ",")
	return true
}
