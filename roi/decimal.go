package roi

// parseDecimal reads the common numeric cell (digits, a decimal point, an
// exponent) without strconv, exactly: it accepts only numbers whose digits
// make an integer of at most 2^53 and whose power of ten is within 10^±22,
// for which one multiplication or division of two exact float64s gives the
// correctly rounded value, the one strconv.ParseFloat gives. Anything else
// (more digits, hexadecimal, Inf, text) is left to strconv.
func parseDecimal(b []byte) (float64, bool) {
	i, neg := 0, false
	if len(b) > 0 && (b[0] == '+' || b[0] == '-') {
		neg = b[0] == '-'
		i++
	}
	var mant uint64
	digits, significant, frac := 0, 0, 0
	point := false
	for ; i < len(b); i++ {
		c := b[i]
		switch {
		case c >= '0' && c <= '9':
			digits++
			if point {
				frac++
			}
			if mant == 0 && c == '0' {
				continue
			}
			significant++
			if significant > 16 {
				return 0, false
			}
			mant = mant*10 + uint64(c-'0')
		case c == '.' && !point:
			point = true
		default:
			goto exponent
		}
	}
exponent:
	if digits == 0 || mant > 1<<53 {
		return 0, false
	}
	exp := 0
	if i < len(b) {
		if b[i] != 'e' && b[i] != 'E' {
			return 0, false
		}
		i++
		eneg := false
		if i < len(b) && (b[i] == '+' || b[i] == '-') {
			eneg = b[i] == '-'
			i++
		}
		if i == len(b) || len(b)-i > 3 {
			return 0, false
		}
		for ; i < len(b); i++ {
			c := b[i]
			if c < '0' || c > '9' {
				return 0, false
			}
			exp = exp*10 + int(c-'0')
		}
		if eneg {
			exp = -exp
		}
	}
	exp -= frac
	f := float64(mant)
	switch {
	case mant == 0:
	case exp < -22 || exp > 22:
		return 0, false
	case exp < 0:
		f /= pow10[-exp]
	default:
		f *= pow10[exp]
	}
	if neg {
		f = -f
	}
	return f, true
}

// pow10 holds the powers of ten that a float64 represents exactly.
var pow10 = [...]float64{1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11,
	1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22}
