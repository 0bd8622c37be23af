package record

// pow10 holds the powers of ten that float64 represents exactly.
var pow10 = [...]float64{
	1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11,
	1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
}

// fastFloat returns mant·10^exp when it can be computed exactly, that is
// correctly rounded with a single IEEE operation: mant ≤ 2^53 and 10^|exp|
// both exact in float64, so the one multiplication or division rounds once.
// This is the fast path of Clinger (1990), "How to read floating point
// numbers accurately", PLDI, as in Go's strconv (atof64exact). Exponents a
// little above 22 are handled by moving zeros into the mantissa while it
// stays ≤ 2^53. Otherwise exact is false and the caller uses strconv.
func fastFloat(mant uint64, exp int) (f float64, exact bool) {
	const maxMant = 1 << 53
	switch {
	case mant == 0:
		return 0, true
	case mant > maxMant:
		return 0, false
	case exp == 0:
		return float64(mant), true
	case exp > 0 && exp <= 22:
		return float64(mant) * pow10[exp], true
	case exp < 0 && exp >= -22:
		return float64(mant) / pow10[-exp], true
	case exp > 22 && exp <= 22+15:
		for ; exp > 22; exp-- {
			mant *= 10
			if mant > maxMant {
				return 0, false
			}
		}
		return float64(mant) * pow10[22], true
	}
	return 0, false
}
