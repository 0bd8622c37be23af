package record

// Timestamps are converted here rather than with package time because
// time.Parse allocates a *Location for every offset other than the local
// one, and because its RFC 3339 parsing falls back to a lenient layout
// parser that also takes one-digit hours, a comma before the fraction and
// offsets such as +24:00, none of which RFC 3339 allows.

// parseRFC3339 converts an RFC 3339 date-time (RFC 3339 §5.6, with an upper
// case T and Z) to Unix milliseconds:
//
//	YYYY-MM-DDTHH:MM:SS[.fraction](Z|+HH:MM|-HH:MM)
//
// Fields are range-checked as time.Parse does (day within its month in the
// proleptic Gregorian calendar, seconds ≤ 59, offset hours ≤ 23); fraction
// digits beyond milliseconds are dropped, which rounds toward −∞ as
// time.Time.UnixMilli does.
func parseRFC3339(s []byte) (ms int64, ok bool) {
	if len(s) < len("2006-01-02T15:04:05Z") ||
		s[4] != '-' || s[7] != '-' || s[10] != 'T' || s[13] != ':' || s[16] != ':' {
		return 0, false
	}
	year, ok1 := num2(s[0:2])
	y2, ok2 := num2(s[2:4])
	month, ok3 := num2(s[5:7])
	day, ok4 := num2(s[8:10])
	hour, ok5 := num2(s[11:13])
	minute, ok6 := num2(s[14:16])
	sec, ok7 := num2(s[17:19])
	year = year*100 + y2
	if !(ok1 && ok2 && ok3 && ok4 && ok5 && ok6 && ok7) ||
		month < 1 || month > 12 || day < 1 || day > daysIn(month, year) ||
		hour > 23 || minute > 59 || sec > 59 {
		return 0, false
	}
	s = s[19:]
	var milli int64
	if s[0] == '.' {
		n := 1
		for ; n < len(s) && '0' <= s[n] && s[n] <= '9'; n++ {
			if n <= 3 {
				milli = milli*10 + int64(s[n]-'0')
			}
		}
		if n == 1 {
			return 0, false
		}
		for k := n; k <= 3; k++ {
			milli *= 10
		}
		s = s[n:]
	}
	var offset int64 // seconds east of UTC
	switch {
	case len(s) == 1 && s[0] == 'Z':
	case len(s) == 6 && (s[0] == '+' || s[0] == '-') && s[3] == ':':
		oh, okh := num2(s[1:3])
		om, okm := num2(s[4:6])
		if !okh || !okm || oh > 23 || om > 59 {
			return 0, false
		}
		offset = int64(oh*3600 + om*60)
		if s[0] == '-' {
			offset = -offset
		}
	default:
		return 0, false
	}
	secs := daysFromCivil(int64(year), month, day)*86400 +
		int64(hour*3600+minute*60+sec) - offset
	return secs*1000 + milli, true
}

// num2 decodes two decimal digits.
func num2(b []byte) (int, bool) {
	if b[0] < '0' || b[0] > '9' || b[1] < '0' || b[1] > '9' {
		return 0, false
	}
	return int(b[0]-'0')*10 + int(b[1]-'0'), true
}

// daysIn returns the number of days of month m (1-12) in year y.
func daysIn(m, y int) int {
	switch m {
	case 2:
		if y%4 == 0 && (y%100 != 0 || y%400 == 0) {
			return 29
		}
		return 28
	case 4, 6, 9, 11:
		return 30
	}
	return 31
}

// daysFromCivil returns the days since 1970-01-01 of a proleptic Gregorian
// date. Algorithm "days_from_civil" of H. Hinnant, "chrono-Compatible
// Low-Level Date Algorithms" (2013).
func daysFromCivil(y int64, m, d int) int64 {
	if m <= 2 {
		y--
	}
	era := floorDiv(y, 400)
	yoe := y - era*400 // [0, 399]
	mp := int64((m + 9) % 12)
	doy := (153*mp+2)/5 + int64(d) - 1     // [0, 365]
	doe := yoe*365 + yoe/4 - yoe/100 + doy // [0, 146096]
	return era*146097 + doe - 719468
}

// civilFromDays inverts daysFromCivil (Hinnant 2013, "civil_from_days").
func civilFromDays(z int64) (y int64, m, d int) {
	z += 719468
	era := floorDiv(z, 146097)
	doe := z - era*146097                                  // [0, 146096]
	yoe := (doe - doe/1460 + doe/36524 - doe/146096) / 365 // [0, 399]
	doy := doe - (365*yoe + yoe/4 - yoe/100)               // [0, 365]
	mp := (5*doy + 2) / 153                                // [0, 11]
	d = int(doy - (153*mp+2)/5 + 1)
	m = int(mp + 3)
	if m > 12 {
		m -= 12
	}
	y = yoe + era*400
	if m <= 2 {
		y++
	}
	return y, m, d
}

func floorDiv(a, b int64) int64 {
	q := a / b
	if (a%b != 0) && ((a < 0) != (b < 0)) {
		q--
	}
	return q
}

// minRFC3339 and maxRFC3339 bound the Unix milliseconds that appendRFC3339
// can write with a four-digit year: 0000-01-01T00:00:00.000Z and
// 9999-12-31T23:59:59.999Z.
const (
	minRFC3339 = -62167219200000
	maxRFC3339 = 253402300799999
)

// appendRFC3339 appends ms (within [minRFC3339, maxRFC3339]) as
// YYYY-MM-DDTHH:MM:SS.mmmZ.
func appendRFC3339(dst []byte, ms int64) []byte {
	secs := floorDiv(ms, 1000)
	milli := int(ms - secs*1000)
	days := floorDiv(secs, 86400)
	sod := int(secs - days*86400)
	y, m, d := civilFromDays(days)
	dst = append(dst, '"')
	dst = appendDigits(dst, int(y), 4)
	dst = append(dst, '-')
	dst = appendDigits(dst, m, 2)
	dst = append(dst, '-')
	dst = appendDigits(dst, d, 2)
	dst = append(dst, 'T')
	dst = appendDigits(dst, sod/3600, 2)
	dst = append(dst, ':')
	dst = appendDigits(dst, sod/60%60, 2)
	dst = append(dst, ':')
	dst = appendDigits(dst, sod%60, 2)
	dst = append(dst, '.')
	dst = appendDigits(dst, milli, 3)
	return append(dst, 'Z', '"')
}

// appendDigits appends the non-negative v zero-padded to width digits.
func appendDigits(dst []byte, v, width int) []byte {
	var buf [4]byte
	for i := width - 1; i >= 0; i-- {
		buf[i] = byte('0' + v%10)
		v /= 10
	}
	return append(dst, buf[:width]...)
}
