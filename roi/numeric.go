package roi

import (
	"encoding/binary"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"
)

// NumericOptions controls what ReadNumeric accepts besides finite numbers.
type NumericOptions struct {
	// AllowMissing reads missing cells (empty, NA, n/a, NaN, nan) as NaN
	// instead of refusing them.
	AllowMissing bool
	// NonFiniteAsMissing reads Inf, -Inf and numbers that overflow a float64
	// (such as 1e400) as NaN instead of refusing them. It is meant for
	// signals read with censoring of bad volumes.
	NonFiniteAsMissing bool
	// MissingHint, when not empty, is added to the message that refuses a
	// missing cell, to say how missing values could be allowed.
	MissingHint string
}

// ReadNumeric reads a wide numeric table (signals or confounds) from path.
// See ParseNumeric for the rules. The file is read as a stream: besides the
// table's numbers, reading holds about one line of text at a time.
func ReadNumeric(path string, opt NumericOptions) (*Numeric, error) {
	f, err := openFile(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	plain, unzipped := fileSizes(f)
	return readNumeric(path, f, opt, func(isGzip bool) int64 {
		if isGzip {
			return unzipped
		}
		return plain
	})
}

// ParseNumeric reads a wide numeric table from r; name is the file name used
// in messages and stored as Path.
//
// The header names the columns: unique, non-empty after trimming spaces.
// Every row has exactly one cell per name; each cell is a finite number with
// a decimal point. Missing cells are refused unless opt.AllowMissing, and
// Inf, -Inf and numbers beyond the float64 range unless
// opt.NonFiniteAsMissing; either way they read as NaN. An empty line between
// rows is a missing cell in a one-column table and an error otherwise;
// blank lines at the end are ignored. A table with a header and no rows is
// an error. An *InputError locates the problem as file:line:column, the
// column counted in cells from 1. The text is read as a stream, and the
// first problem in it is the one reported.
func ParseNumeric(name string, r io.Reader, opt NumericOptions) (*Numeric, error) {
	var size int64
	if l, ok := r.(interface{ Len() int }); ok { // bytes.Reader, strings.Reader, bytes.Buffer
		size = int64(l.Len())
	}
	return readNumeric(name, r, opt, func(isGzip bool) int64 {
		if isGzip {
			return 0
		}
		return size
	})
}

// readNumeric reads the table in r. size gives the length of its text, if
// known (else 0), given whether r is gzip-compressed.
func readNumeric(name string, r io.Reader, opt NumericOptions, size func(isGzip bool) int64) (*Numeric, error) {
	src, isGzip, done, err := decompress(name, r)
	if err != nil {
		return nil, err
	}
	defer done()
	return parseNumericStream(name, src, isGzip, size(isGzip), opt)
}

// fileSizes returns the size of f and, when f is gzip-compressed, the size
// of its text as the gzip trailer gives it (modulo 4 GiB, of the last member
// only: a guess), or 0.
func fileSizes(f *os.File) (plain, unzipped int64) {
	st, err := f.Stat()
	if err != nil || !st.Mode().IsRegular() {
		return 0, 0
	}
	plain = st.Size()
	var b [4]byte
	if plain < 18 { // a gzip header and trailer
		return plain, 0
	}
	if _, err := f.ReadAt(b[:2], 0); err != nil || string(b[:2]) != gzipMagic {
		return plain, 0
	}
	if _, err := f.ReadAt(b[:], plain-4); err != nil {
		return plain, 0
	}
	unzipped = int64(binary.LittleEndian.Uint32(b[:]))
	if unzipped < plain {
		return plain, 0 // more than 4 GiB of text, or not one member
	}
	return plain, unzipped
}

// headerLooksLikeData refuses a header whose names are all numbers and not
// all integers: such a table has lost its header line. (Integer names are
// accepted, since atlases often label regions 1, 2, 3, ...)
func headerLooksLikeData(file string, delim byte, names []string, line int) error {
	integers := true
	for _, n := range names {
		if _, st := parseCell(n); st != cellNumber {
			return nil
		}
		if _, err := strconv.ParseInt(n, 10, 64); err != nil {
			integers = false
		}
	}
	if integers {
		return nil
	}
	return &InputError{File: file, Line: line,
		Found:    fmt.Sprintf("the first line %q holds numbers, not column names", shorten(strings.Join(names, string(delim)), 40)),
		Expected: "a header line naming each column (for signals, one name per region) before the numbers"}
}
