package subspace

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"
	"unicode"
)

// File formats.
//
// NumPy .npy (versions 1, 2 and 3): an array of shape (r, m, n), or (m, n)
// for a single matrix, in C or Fortran order, little or big endian. float64
// is read as is; float32, and signed and unsigned integers of 1 to 8 bytes,
// are converted to float64 (an integer that float64 cannot hold exactly is
// refused). Complex, boolean, object and other dtypes are refused.
//
// Plain text: '#' starts a comment that runs to the end of the line. The
// first non-comment content is three integers "r m n"; then come r·m·n
// numbers separated by white space (line breaks anywhere), matrix 0 row by
// row, then matrix 1, and so on. Anything after the last number other than
// comments and white space is an error.

var npyMagic = []byte("\x93NUMPY")

// ReadFile reads a basis from a .npy or plain-text file, telling them apart
// by the .npy magic bytes. The file is opened read-only. Errors name the file.
func ReadFile(path string, maxBytes int64) (Basis, error) {
	f, err := os.Open(path)
	if err != nil {
		return Basis{}, err
	}
	defer f.Close()
	br := bufio.NewReader(f)
	head, _ := br.Peek(len(npyMagic))
	var b Basis
	if bytes.Equal(head, npyMagic) {
		b, err = ReadNPY(br, maxBytes)
	} else {
		b, err = ReadText(br, maxBytes)
	}
	if err != nil {
		return Basis{}, fmt.Errorf("%s: %w", path, err)
	}
	return b, nil
}

// readFailure reports a failed read: a file that ends early is malformed
// (ErrFormat, with what says where); any other error (a device error, a
// directory) is reported as the read error it is.
func readFailure(err error, what string) error {
	if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
		return fmt.Errorf("%w: %s", ErrFormat, what)
	}
	return fmt.Errorf("subspace: reading: %w", err)
}

func limitOf(maxBytes int64) int64 {
	if maxBytes <= 0 {
		return DefaultMaxBytes
	}
	return maxBytes
}

// checkShape validates a shape read from a file against the memory limit.
func checkShape(r, m, n int64, maxBytes int64) (int, error) {
	if r <= 0 || m <= 0 || n <= 0 {
		return 0, fmt.Errorf("%w: shape (%d, %d, %d) has a zero or negative size", ErrFormat, r, m, n)
	}
	lim := limitOf(maxBytes) / 8
	if r > lim || m > lim || n > lim || m*n > lim || r > lim/(m*n) {
		return 0, fmt.Errorf("%w: shape (%d, %d, %d) needs more than the %d-byte limit", ErrTooLarge, r, m, n, limitOf(maxBytes))
	}
	return int(r * m * n), nil
}

// ReadNPY reads a basis from NumPy .npy data. maxBytes bounds the data
// accepted (0 means DefaultMaxBytes); nothing larger is allocated.
func ReadNPY(rd io.Reader, maxBytes int64) (Basis, error) {
	var pre [8]byte
	if _, err := io.ReadFull(rd, pre[:]); err != nil {
		return Basis{}, readFailure(err, "npy: truncated preamble")
	}
	if !bytes.Equal(pre[:6], npyMagic) {
		return Basis{}, fmt.Errorf("%w: npy: bad magic bytes", ErrFormat)
	}
	var hlen int
	switch pre[6] {
	case 1:
		var l [2]byte
		if _, err := io.ReadFull(rd, l[:]); err != nil {
			return Basis{}, readFailure(err, "npy: truncated header length")
		}
		hlen = int(binary.LittleEndian.Uint16(l[:]))
	case 2, 3:
		var l [4]byte
		if _, err := io.ReadFull(rd, l[:]); err != nil {
			return Basis{}, readFailure(err, "npy: truncated header length")
		}
		h := binary.LittleEndian.Uint32(l[:])
		if h > 1<<20 {
			return Basis{}, fmt.Errorf("%w: npy: header length %d is implausible", ErrFormat, h)
		}
		hlen = int(h)
	default:
		return Basis{}, fmt.Errorf("%w: npy: unsupported format version %d.%d", ErrFormat, pre[6], pre[7])
	}
	hdr := make([]byte, hlen)
	if _, err := io.ReadFull(rd, hdr); err != nil {
		return Basis{}, readFailure(err, "npy: truncated header")
	}
	descr, fortran, shape, err := parseNPYHeader(string(hdr))
	if err != nil {
		return Basis{}, err
	}
	var r, m, n int64
	switch len(shape) {
	case 2:
		r, m, n = 1, shape[0], shape[1]
	case 3:
		r, m, n = shape[0], shape[1], shape[2]
	default:
		return Basis{}, fmt.Errorf("%w: npy: shape has %d dimensions, want (r, m, n) or (m, n)", ErrFormat, len(shape))
	}
	total, err := checkShape(r, m, n, maxBytes)
	if err != nil {
		return Basis{}, err
	}
	conv, size, err := npyConverter(descr)
	if err != nil {
		return Basis{}, err
	}
	flat := make([]float64, 0, min(total, 1<<17))
	buf := make([]byte, 1<<16)
	buf = buf[:len(buf)/size*size]
	for len(flat) < total {
		want := min((total-len(flat))*size, len(buf))
		got, err := io.ReadFull(rd, buf[:want])
		if err != nil {
			return Basis{}, readFailure(err, fmt.Sprintf("npy: data truncated after %d of %d values", len(flat)+got/size, total))
		}
		for off := 0; off < got; off += size {
			v, err := conv(buf[off : off+size])
			if err != nil {
				return Basis{}, fmt.Errorf("%w: npy: value %d: %v", ErrFormat, len(flat), err)
			}
			flat = append(flat, v)
		}
	}
	var one [1]byte
	if k, _ := rd.Read(one[:]); k > 0 {
		return Basis{}, fmt.Errorf("%w: npy: trailing bytes after %d values", ErrFormat, total)
	}
	b := Basis{Count: int(r), Rows: int(m), Cols: int(n), Data: flat}
	if fortran {
		// Fortran order: element (t, i, j) is at t + r·(i + m·j).
		c := make([]float64, total)
		ri, mi, ni := int(r), int(m), int(n)
		for t := 0; t < ri; t++ {
			for i := 0; i < mi; i++ {
				for j := 0; j < ni; j++ {
					c[(t*mi+i)*ni+j] = flat[t+ri*(i+mi*j)]
				}
			}
		}
		b.Data = c
	}
	return b, nil
}

// parseNPYHeader parses the Python dict literal of an .npy header.
func parseNPYHeader(h string) (descr string, fortran bool, shape []int64, err error) {
	bad := func(what string) (string, bool, []int64, error) {
		return "", false, nil, fmt.Errorf("%w: npy header: %s", ErrFormat, what)
	}
	h = strings.TrimSpace(h)
	if !strings.HasPrefix(h, "{") || !strings.HasSuffix(h, "}") {
		return bad("not a dictionary")
	}
	body := h[1 : len(h)-1]
	get := func(key string) (string, bool) {
		for _, q := range []string{"'", "\""} {
			k := q + key + q
			i := strings.Index(body, k)
			if i < 0 {
				continue
			}
			rest := strings.TrimSpace(body[i+len(k):])
			if !strings.HasPrefix(rest, ":") {
				return "", false
			}
			return strings.TrimSpace(rest[1:]), true
		}
		return "", false
	}
	d, ok := get("descr")
	if !ok || len(d) < 2 || (d[0] != '\'' && d[0] != '"') {
		return bad("missing or non-string 'descr'")
	}
	end := strings.IndexByte(d[1:], d[0])
	if end < 0 {
		return bad("unterminated 'descr'")
	}
	descr = d[1 : 1+end]
	fo, ok := get("fortran_order")
	switch {
	case ok && strings.HasPrefix(fo, "True"):
		fortran = true
	case ok && strings.HasPrefix(fo, "False"):
	default:
		return bad("missing 'fortran_order'")
	}
	sh, ok := get("shape")
	if !ok || !strings.HasPrefix(sh, "(") {
		return bad("missing 'shape'")
	}
	close := strings.IndexByte(sh, ')')
	if close < 0 {
		return bad("unterminated 'shape'")
	}
	for _, f := range strings.Split(sh[1:close], ",") {
		f = strings.TrimSpace(f)
		if f == "" {
			continue
		}
		v, e := strconv.ParseInt(strings.TrimSuffix(f, "L"), 10, 64)
		if e != nil || v < 0 {
			return bad("bad shape entry " + strconv.Quote(f))
		}
		shape = append(shape, v)
	}
	return descr, fortran, shape, nil
}

// npyConverter returns a decoder of one element of dtype descr to float64.
func npyConverter(descr string) (func([]byte) (float64, error), int, error) {
	if len(descr) < 3 {
		return nil, 0, fmt.Errorf("%w: npy: unsupported dtype %q", ErrFormat, descr)
	}
	var bo binary.ByteOrder = binary.LittleEndian
	switch descr[0] {
	case '<', '|', '=':
	case '>':
		bo = binary.BigEndian
	default:
		return nil, 0, fmt.Errorf("%w: npy: unsupported dtype %q", ErrFormat, descr)
	}
	kind, sz := descr[1], descr[2:]
	size, err := strconv.Atoi(sz)
	if err != nil {
		return nil, 0, fmt.Errorf("%w: npy: unsupported dtype %q", ErrFormat, descr)
	}
	const exact = 1 << 53
	switch {
	case kind == 'f' && size == 8:
		return func(b []byte) (float64, error) { return math.Float64frombits(bo.Uint64(b)), nil }, 8, nil
	case kind == 'f' && size == 4:
		return func(b []byte) (float64, error) { return float64(math.Float32frombits(bo.Uint32(b))), nil }, 4, nil
	case kind == 'i' && (size == 1 || size == 2 || size == 4 || size == 8):
		return func(b []byte) (float64, error) {
			var v int64
			switch size {
			case 1:
				v = int64(int8(b[0]))
			case 2:
				v = int64(int16(bo.Uint16(b)))
			case 4:
				v = int64(int32(bo.Uint32(b)))
			default:
				v = int64(bo.Uint64(b))
			}
			if v > exact || v < -exact {
				return 0, fmt.Errorf("integer %d is not exactly representable as float64", v)
			}
			return float64(v), nil
		}, size, nil
	case kind == 'u' && (size == 1 || size == 2 || size == 4 || size == 8):
		return func(b []byte) (float64, error) {
			var v uint64
			switch size {
			case 1:
				v = uint64(b[0])
			case 2:
				v = uint64(bo.Uint16(b))
			case 4:
				v = uint64(bo.Uint32(b))
			default:
				v = bo.Uint64(b)
			}
			if v > exact {
				return 0, fmt.Errorf("integer %d is not exactly representable as float64", v)
			}
			return float64(v), nil
		}, size, nil
	}
	return nil, 0, fmt.Errorf("%w: npy: unsupported dtype %q (want a real float or integer type)", ErrFormat, descr)
}

// WriteNPY writes b as a version 1.0 .npy array of shape (r, m, n), '<f8', C order.
func WriteNPY(wr io.Writer, b Basis) error {
	if err := checkBasis(b); err != nil {
		return err
	}
	h := fmt.Sprintf("{'descr': '<f8', 'fortran_order': False, 'shape': (%d, %d, %d), }", b.Count, b.Rows, b.Cols)
	pad := 64 - (10+len(h)+1)%64
	if pad == 64 {
		pad = 0
	}
	h += strings.Repeat(" ", pad) + "\n"
	bw := bufio.NewWriter(wr)
	bw.Write(npyMagic)
	bw.Write([]byte{1, 0})
	var l [2]byte
	binary.LittleEndian.PutUint16(l[:], uint16(len(h)))
	bw.Write(l[:])
	bw.WriteString(h)
	var e [8]byte
	for _, v := range b.Data {
		binary.LittleEndian.PutUint64(e[:], math.Float64bits(v))
		bw.Write(e[:])
	}
	return bw.Flush()
}

// WriteText writes b in the plain-text format, with shortest round-trip
// decimal representations, one matrix row per line.
func WriteText(wr io.Writer, b Basis) error {
	if err := checkBasis(b); err != nil {
		return err
	}
	bw := bufio.NewWriter(wr)
	fmt.Fprintf(bw, "# %d matrices of %d×%d, each row-major\n%d %d %d\n", b.Count, b.Rows, b.Cols, b.Count, b.Rows, b.Cols)
	for t := 0; t < b.Count; t++ {
		fmt.Fprintf(bw, "# matrix %d\n", t)
		for i := 0; i < b.Rows; i++ {
			row := b.Data[(t*b.Rows+i)*b.Cols : (t*b.Rows+i+1)*b.Cols]
			for j, v := range row {
				if j > 0 {
					bw.WriteByte(' ')
				}
				bw.WriteString(strconv.FormatFloat(v, 'g', -1, 64))
			}
			bw.WriteByte('\n')
		}
	}
	return bw.Flush()
}

func checkBasis(b Basis) error {
	if b.Count <= 0 || b.Rows <= 0 || b.Cols <= 0 || len(b.Data) != b.Count*b.Rows*b.Cols {
		return fmt.Errorf("%w: basis of %d matrices of %d×%d with %d entries", ErrShape, b.Count, b.Rows, b.Cols, len(b.Data))
	}
	return nil
}

// ReadText reads a basis in the plain-text format. maxBytes bounds the data
// accepted (0 means DefaultMaxBytes). Errors give the line number.
func ReadText(rd io.Reader, maxBytes int64) (Basis, error) {
	sc := bufio.NewScanner(rd)
	sc.Buffer(make([]byte, 64*1024), 1<<26)
	line := 0
	var tokens []string
	next := func() (string, int, error) {
		for len(tokens) == 0 {
			if !sc.Scan() {
				if err := sc.Err(); err != nil {
					if errors.Is(err, bufio.ErrTooLong) {
						return "", line, fmt.Errorf("%w: text: line %d: %v", ErrFormat, line+1, err)
					}
					return "", line, fmt.Errorf("subspace: reading text at line %d: %w", line+1, err)
				}
				return "", line, io.EOF
			}
			line++
			s := sc.Text()
			if i := strings.IndexByte(s, '#'); i >= 0 {
				s = s[:i]
			}
			tokens = strings.FieldsFunc(s, unicode.IsSpace)
		}
		t := tokens[0]
		tokens = tokens[1:]
		return t, line, nil
	}
	var dims [3]int64
	for i := range dims {
		t, ln, err := next()
		if err == io.EOF {
			return Basis{}, fmt.Errorf("%w: text: missing header \"r m n\"", ErrFormat)
		}
		if err != nil {
			return Basis{}, err
		}
		v, e := strconv.ParseInt(t, 10, 64)
		if e != nil {
			return Basis{}, fmt.Errorf("%w: text: line %d: header entry %q is not an integer", ErrFormat, ln, t)
		}
		dims[i] = v
	}
	total, err := checkShape(dims[0], dims[1], dims[2], maxBytes)
	if err != nil {
		return Basis{}, err
	}
	data := make([]float64, 0, min(total, 1<<17))
	for len(data) < total {
		t, ln, err := next()
		if err == io.EOF {
			return Basis{}, fmt.Errorf("%w: text: truncated: %d numbers expected, %d found", ErrFormat, total, len(data))
		}
		if err != nil {
			return Basis{}, err
		}
		v, e := strconv.ParseFloat(t, 64)
		if e != nil {
			if ne, ok := e.(*strconv.NumError); !ok || ne.Err != strconv.ErrRange {
				return Basis{}, fmt.Errorf("%w: text: line %d: %q is not a number", ErrFormat, ln, t)
			}
		}
		data = append(data, v)
	}
	if t, ln, err := next(); err == nil {
		return Basis{}, fmt.Errorf("%w: text: line %d: unexpected %q after the %d numbers", ErrFormat, ln, t, total)
	} else if err != io.EOF {
		return Basis{}, err
	}
	return Basis{Count: int(dims[0]), Rows: int(dims[1]), Cols: int(dims[2]), Data: data}, nil
}
