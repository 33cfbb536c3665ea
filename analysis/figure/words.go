// Counts with the noun in the right number: "1 band jump", "2 band jumps", "0 entries".
// Every text the program writes (screen, summary text, reports, messages) counts things
// through these.

package figure

import (
	"math"
	"strconv"
	"strings"
)

// Number is what Count and Noun take.
type Number interface {
	~int | ~int32 | ~int64 | ~float64
}

// Count returns n and the noun in its number: Count(1, "band jump") is "1 band jump",
// Count(3, "band jump") "3 band jumps". A float prints as strconv's shortest form.
func Count[N Number](n N, noun string) string {
	return format(n) + " " + Noun(n, noun)
}

// Noun returns the noun in its number for n: singular for exactly 1 or -1, plural
// otherwise (0 setpoints, 1.5 counts, 2 counts). The plural of the last word is regular
// English: step -> steps, entry -> entries, glitch -> glitches.
func Noun[N Number](n N, noun string) string {
	if n == 1 || n == -1 {
		return noun
	}
	return Plural(noun)
}

// Plural returns the plural of a noun (of its last word when it has several).
func Plural(noun string) string {
	i := strings.LastIndexByte(noun, ' ') + 1
	head, w := noun[:i], noun[i:]
	switch {
	case w == "":
		return noun
	case irregular[w] != "":
		return head + irregular[w]
	case strings.HasSuffix(w, "y") && len(w) > 1 && !strings.ContainsRune("aeiou", rune(w[len(w)-2])):
		return head + w[:len(w)-1] + "ies"
	case strings.HasSuffix(w, "s"), strings.HasSuffix(w, "x"), strings.HasSuffix(w, "ch"), strings.HasSuffix(w, "sh"):
		return head + w + "es"
	}
	return head + w + "s"
}

// irregular holds the plurals English does not make by rule, among the words used.
var irregular = map[string]string{
	"datum": "data",
}

func format[N Number](n N) string {
	f := float64(n)
	if f == math.Trunc(f) && math.Abs(f) < 1e15 {
		return strconv.FormatInt(int64(f), 10)
	}
	return strconv.FormatFloat(f, 'f', -1, 64)
}

// CountText returns a number already written (text) and the noun in its number: the
// singular when the text reads exactly 1 ("1", "-1", "+1", "±1", "1.0" is plural, as
// written decimals are). CountText("4", "count") is "4 counts".
func CountText(text, noun string) string {
	t := strings.TrimLeft(text, "+-±−")
	if t == "1" {
		return text + " " + noun
	}
	return text + " " + Plural(noun)
}

// Pick returns one for a count of exactly 1 or -1, else other: the verb that agrees
// with a count ("1 sample is missing", "2 samples are missing").
func Pick[N Number](n N, one, other string) string {
	if n == 1 || n == -1 {
		return one
	}
	return other
}
