// Package advice turns goals (ripple, settling time, static error, parts on hand, pin
// current) and, when there is a capture, the identified plant into concrete suggestions
// for a switched-RC analog output: the deadband count with its arithmetic, a ranked table
// of standard R and C pairs, the sample period and, when nothing on hand can meet the
// goals, a change of circuit. Every figure it shows comes from running the loop model
// (package analysis/loop), not from a formula alone.
//
// The search tries every pair of the chosen IEC 60063 series (E6, E12, E24, E96) or of an
// explicit parts list. Closed forms prune first (pin current Vs/R, reach of V_inf with the
// load, the RC settling time, the smallest possible ripple); the survivors run a short
// closed loop; the best run again, longer and with other seeds. Figures are the mean
// over those seeds, the verdict takes the worst seed.
//
//	a, err := advice.Design(advice.Request{
//		SupplyV: 5, Bits: 10, PeriodS: 1e-3, Mode: loop.ThreeState, LoadOhm: 1e6,
//		Goals: advice.Goals{RippleV: 0.1, SettleS: 0.2},
//	})
//	// a.Candidates[0]: R, C, predicted ripple p-p and settling time, pin current, verdict
//	// *a.DeadbandCounts and a.Deadband: the band and the arithmetic behind it
//
// The table is ranked by three keys, in order (see plant.better): meeting every numeric
// goal in the loop model; then, among pairs that meet them, the number of rules of the
// trade broken (load under 10 R, pin current over half the limit, R outside 1 kOhm to
// 100 kOhm, C outside 10 nF to 10 uF; common practice) and how far beyond their bounds,
// so that a pair that breaks one ranks below every pair that meets the goals and breaks
// none, and its verdict names the rule ("meets goals; load under 10 R"); then the margin on the goals (the smallest log
// ratio of goal to figure), so the pair in the middle of the window wins. Candidate.MeetsGoals
// and Candidate.RulesBroken carry the first two keys; the figures are the loop model's.
//
// Definitions used throughout: ripple p-p is the spread of the output between its 0.5 %
// and 99.5 % points over the steady part at each used setpoint (the largest of them);
// settling is timed on a full-scale step (lowest to highest used setpoint, and back) to
// within the larger of the ripple goal, the static-error goal and db + 1 counts; the
// deadband is the smallest db with step + k sigma < 2 db + 1 at every used setpoint.
package advice
