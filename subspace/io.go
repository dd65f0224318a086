package subspace

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"math/cmplx"
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
//
// Besides the readers' own checks, ReadFile refuses a file whose size cannot
// hold the declared shape (before allocating anything), an entry that is
// NaN or infinite (ErrNotFinite, naming the matrix and entry) and a file in
// which every matrix is zero (ErrZero), so that these errors name the file.
func ReadFile(path string, maxBytes int64) (Basis, error) {
	b, err := realOnly(ReadInput(path, maxBytes))
	if err != nil && !strings.HasPrefix(err.Error(), path+": ") {
		return Basis{}, fmt.Errorf("%s: %w", path, err)
	}
	return b, err
}

// Input is a basis read from a file: real (Real set) or complex (Complex
// set), as Field says.
type Input struct {
	Field   Field
	Real    Basis
	Complex ComplexBasis
}

// AsComplex returns the input as complex matrices (real data with zero
// imaginary parts), to treat real data over C.
func (in Input) AsComplex() ComplexBasis {
	if in.Field == Complex {
		return in.Complex
	}
	return ComplexFromReal(in.Real)
}

// ReadInput reads a real or complex basis from a .npy file (float, integer
// or complex dtypes) or a text file (real, or complex when the header's
// fourth word is "complex"), with the checks of ReadFile. The file is not
// modified; errors name it.
func ReadInput(path string, maxBytes int64) (Input, error) {
	f, err := os.Open(path)
	if err != nil {
		return Input{}, err
	}
	defer f.Close()
	size := int64(-1)
	if st, err := f.Stat(); err == nil && st.Mode().IsRegular() {
		size = st.Size()
	}
	in, err := readInput(bufio.NewReader(f), maxBytes, size)
	if err != nil {
		return Input{}, fmt.Errorf("%s: %w", path, err)
	}
	return in, nil
}

// ParseInput is ReadInput for the bytes of a file already in memory (for
// a caller that also hashes them): the same formats and checks.
func ParseInput(data []byte, maxBytes int64) (Input, error) {
	return readInput(bufio.NewReader(bytes.NewReader(data)), maxBytes, int64(len(data)))
}

// readInput tells .npy from text by the magic bytes, refuses zip archives,
// reads, and refuses NaN/Inf and all-zero data; size is the stream's length
// when known (−1 otherwise).
func readInput(br *bufio.Reader, maxBytes, size int64) (Input, error) {
	head, _ := br.Peek(len(npyMagic))
	if bytes.HasPrefix(head, []byte("PK\x03\x04")) || bytes.HasPrefix(head, []byte("PK\x05\x06")) {
		return Input{}, fmt.Errorf("%w: a zip archive (an .npz file?): save one array with numpy.save as .npy", ErrFormat)
	}
	var in Input
	var err error
	if bytes.Equal(head, npyMagic) {
		in, err = readNPYInput(br, maxBytes, size)
	} else {
		in, err = readTextInput(br, maxBytes, size)
	}
	if err == nil {
		if in.Field == Complex {
			err = checkComplexValues(in.Complex)
		} else {
			err = checkValues(in.Real)
		}
	}
	return in, err
}

// checkComplexValues is checkValues for complex data.
func checkComplexValues(b ComplexBasis) error {
	L := b.Rows * b.Cols
	zero := true
	for idx, z := range b.Data {
		if cmplx.IsNaN(z) || cmplx.IsInf(z) {
			t, rem := idx/L, idx%L
			return fmt.Errorf("%w: matrix %d, entry (%d, %d) is %v", ErrNotFinite, t, rem/b.Cols, rem%b.Cols, z)
		}
		if z != 0 {
			zero = false
		}
	}
	if zero {
		return fmt.Errorf("%w: all %d matrices of %d×%d", ErrZero, b.Count, b.Rows, b.Cols)
	}
	return nil
}

// checkValues refuses a basis with a NaN or infinite entry, or with every
// entry zero.
func checkValues(b Basis) error {
	L := b.Rows * b.Cols
	zero := true
	for idx, v := range b.Data {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			t, rem := idx/L, idx%L
			return fmt.Errorf("%w: matrix %d, entry (%d, %d) is %v", ErrNotFinite, t, rem/b.Cols, rem%b.Cols, v)
		}
		if v != 0 {
			zero = false
		}
	}
	if zero {
		return fmt.Errorf("%w: all %d matrices of %d×%d", ErrZero, b.Count, b.Rows, b.Cols)
	}
	return nil
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

// checkShape validates a shape read from a file against the memory limit:
// the data read (8 bytes an entry) and the working storage of New that
// follows (workBytes) must fit in maxBytes together, so that the limit
// bounds the peak of reading and orthonormalising, and a shape that New
// would refuse is refused before a byte of data is read.
func checkShape(r, m, n int64, maxBytes int64) (int, error) {
	return checkShapeField(r, m, n, maxBytes, false)
}

// checkArrayShape checks that an array of r×m×n entries (16 bytes each
// when complex, else 8) fits in maxBytes, without overflow.
func checkArrayShape(r, m, n int64, maxBytes int64, complex bool) (int, error) {
	if r <= 0 || m <= 0 || n <= 0 {
		return 0, fmt.Errorf("%w: shape (%d, %d, %d) has a zero or negative size", ErrFormat, r, m, n)
	}
	item := int64(8)
	if complex {
		item = 16
	}
	lim := maxBytes / item
	if r > lim || m > lim || n > lim || m*n > lim || r > lim/(m*n) {
		return 0, fmt.Errorf("%w: shape (%d, %d, %d) needs more than %d bytes", ErrTooLarge, r, m, n, maxBytes)
	}
	return int(r * m * n), nil
}

// checkShapeField is checkShape for real (complex false) or complex data:
// a complex entry takes 16 bytes, and NewComplex orthonormalises 2r real
// vectors of 2mn entries and stores W” of 2k vectors of 4mn entries
// (complexWorkBytes).
func checkShapeField(r, m, n int64, maxBytes int64, complex bool) (int, error) {
	if r <= 0 || m <= 0 || n <= 0 {
		return 0, fmt.Errorf("%w: shape (%d, %d, %d) has a zero or negative size", ErrFormat, r, m, n)
	}
	limit := limitOf(maxBytes)
	lim := limit / 8
	if r > lim || m > lim || n > lim || m*n > lim || r > lim/(m*n) {
		return 0, fmt.Errorf("%w: shape (%d, %d, %d) needs more than the %d-byte limit", ErrTooLarge, r, m, n, limit)
	}
	data := mulSat(8, mulSat(r, mulSat(m, n)))
	need := sumSat(data, workBytes(int(r), int(m*n)))
	if complex {
		if r > lim/(4*m*n) {
			return 0, fmt.Errorf("%w: shape (%d, %d, %d) needs more than the %d-byte limit", ErrTooLarge, r, m, n, limit)
		}
		data = mulSat(16, mulSat(r, mulSat(m, n)))
		need = complexWorkBytes(r, m, n)
	}
	if tooLarge(need, limit) {
		return 0, fmt.Errorf("%w: shape (%d, %d, %d): reading (%d bytes) and orthonormalising need about %d bytes, limit %d",
			ErrTooLarge, r, m, n, data, need, limit)
	}
	return int(r * m * n), nil
}

// ReadArray reads a real or complex .npy array held in memory, for callers
// that only read it and never orthonormalise it (proof files' certificates
// and branch-and-bound cells): no room is reserved for an
// orthonormalisation, and the declared shape is checked against len(data)
// and the decoded size against 2·len(data) + 1 MiB before anything is
// allocated. The checks of the format are ReadNPY's.
func ReadArray(data []byte) (Input, error) {
	// The decoded array (8 or 16 bytes an entry) may be at most twice the
	// bytes given (+1 MiB): 8-byte reals and 16-byte complex entries cost
	// what they take in the file, 4-byte floats twice; narrower integer
	// dtypes of a large shape are refused before allocating.
	return readNPYData(bytes.NewReader(data), 2*int64(len(data))+1<<20, int64(len(data)), true)
}

// ReadNPY reads a basis from NumPy .npy data. maxBytes (0 means
// DefaultMaxBytes) bounds the data and the orthonormalisation after it
// together (see checkShape); the data are read in 64 KiB chunks into one
// array of the declared size, so the peak is the data's size.
func ReadNPY(rd io.Reader, maxBytes int64) (Basis, error) { return readNPY(rd, maxBytes, -1) }

// readNPY is ReadNPY; size ≥ 0 is the whole stream's length when known, and
// a stream too short for its declared shape is refused before allocating.
func readNPY(rd io.Reader, maxBytes, size int64) (Basis, error) {
	return realOnly(readNPYInput(rd, maxBytes, size))
}

// realOnly returns the real basis of in, or refuses complex data (the
// real-only readers' answer to a complex file).
func realOnly(in Input, err error) (Basis, error) {
	if err != nil {
		return Basis{}, err
	}
	if in.Field == Complex {
		return Basis{}, fmt.Errorf("%w: complex data (read it with ReadInput, or certify -field complex)", ErrFormat)
	}
	return in.Real, nil
}

// readNPYInput reads real or complex .npy data (complex64 and complex128
// are read as pairs of components, real part first, as NumPy stores them).
func readNPYInput(rd io.Reader, maxBytes, size int64) (Input, error) {
	return readNPYData(rd, maxBytes, size, false)
}

// readNPYData is readNPYInput; with readOnly set, maxBytes bounds the
// decoded array alone (no orthonormalisation follows).
func readNPYData(rd io.Reader, maxBytes, size int64, readOnly bool) (Input, error) {
	h, err := readNPYHead(rd)
	if err != nil {
		return Input{}, err
	}
	descr, fortran, shape := h.descr, h.fortran, h.shape
	var r, m, n int64
	switch len(shape) {
	case 2:
		r, m, n = 1, shape[0], shape[1]
	case 3:
		r, m, n = shape[0], shape[1], shape[2]
	default:
		return Input{}, fmt.Errorf("%w: npy: shape has %d dimensions, want (r, m, n) or (m, n)", ErrFormat, len(shape))
	}
	conv, item, parts, err := npyConverter(descr)
	if err != nil {
		return Input{}, err
	}
	var total int
	if readOnly {
		total, err = checkArrayShape(r, m, n, maxBytes, parts == 2)
	} else {
		total, err = checkShapeField(r, m, n, maxBytes, parts == 2)
	}
	if err != nil {
		return Input{}, err
	}
	total *= parts // components to read
	if size >= 0 {
		if want := h.offset + int64(total)*int64(item); size < want {
			return Input{}, fmt.Errorf("%w: npy: data truncated: shape (%d, %d, %d) needs %d bytes, the file has %d", ErrFormat, r, m, n, want, size)
		}
	}
	// One array of the declared size (its pages are touched only as data
	// arrive), filled in file order; Fortran order, where element (t, i, j)
	// is at t + r·(i + m·j), is scattered straight to its row-major place.
	// Complex data go straight to their complex128 array (component c of
	// entry e at place 2e + c), without a real copy first.
	var data []float64
	var cd []complex128
	if parts == 2 {
		cd = make([]complex128, total/2)
	} else {
		data = make([]float64, total)
	}
	ri, mi, ni := int(r), int(m), int(n)
	place := func(s int) int { return s }
	if fortran {
		place = func(s int) int {
			c := s % parts // the component of a complex entry
			s /= parts
			t, q := s%ri, s/ri
			return ((t*mi+q%mi)*ni+q/mi)*parts + c
		}
	}
	buf := make([]byte, 1<<16)
	buf = buf[:len(buf)/item*item]
	for done := 0; done < total; {
		want := min((total-done)*item, len(buf))
		got, err := io.ReadFull(rd, buf[:want])
		if err != nil {
			return Input{}, readFailure(err, fmt.Sprintf("npy: data truncated after %d of %d values", done+got/item, total))
		}
		for off := 0; off < got; off += item {
			v, err := conv(buf[off : off+item])
			if err != nil {
				return Input{}, fmt.Errorf("%w: npy: value %d: %v", ErrFormat, done, err)
			}
			if at := place(done); cd == nil {
				data[at] = v
			} else if z := &cd[at/2]; at%2 == 0 {
				*z = complex(v, imag(*z))
			} else {
				*z = complex(real(*z), v)
			}
			done++
		}
	}
	var one [1]byte
	if k, _ := rd.Read(one[:]); k > 0 {
		return Input{}, fmt.Errorf("%w: npy: trailing bytes after %d values", ErrFormat, total)
	}
	if parts == 2 {
		return Input{Field: Complex, Complex: ComplexBasis{Count: ri, Rows: mi, Cols: ni, Data: cd}}, nil
	}
	return Input{Field: Real, Real: Basis{Count: ri, Rows: mi, Cols: ni, Data: data}}, nil
}

// npyHead is what an .npy file's preamble and header say: the dtype, the
// order, the shape and where the data start.
type npyHead struct {
	descr   string
	fortran bool
	shape   []int64
	offset  int64
}

// readNPYHead reads an .npy file's preamble and header from rd.
func readNPYHead(rd io.Reader) (npyHead, error) {
	var pre [8]byte
	if _, err := io.ReadFull(rd, pre[:]); err != nil {
		return npyHead{}, readFailure(err, "npy: truncated preamble")
	}
	if !bytes.Equal(pre[:6], npyMagic) {
		return npyHead{}, fmt.Errorf("%w: npy: bad magic bytes", ErrFormat)
	}
	var hlen int
	offset := int64(len(pre))
	switch pre[6] {
	case 1:
		var l [2]byte
		if _, err := io.ReadFull(rd, l[:]); err != nil {
			return npyHead{}, readFailure(err, "npy: truncated header length")
		}
		hlen = int(binary.LittleEndian.Uint16(l[:]))
		offset += 2
	case 2, 3:
		var l [4]byte
		if _, err := io.ReadFull(rd, l[:]); err != nil {
			return npyHead{}, readFailure(err, "npy: truncated header length")
		}
		h := binary.LittleEndian.Uint32(l[:])
		if h > 1<<20 {
			return npyHead{}, fmt.Errorf("%w: npy: header length %d is implausible", ErrFormat, h)
		}
		hlen = int(h)
		offset += 4
	default:
		return npyHead{}, fmt.Errorf("%w: npy: unsupported format version %d.%d", ErrFormat, pre[6], pre[7])
	}
	hdr := make([]byte, hlen)
	if _, err := io.ReadFull(rd, hdr); err != nil {
		return npyHead{}, readFailure(err, "npy: truncated header")
	}
	descr, fortran, shape, err := parseNPYHeader(string(hdr))
	if err != nil {
		return npyHead{}, err
	}
	return npyHead{descr: descr, fortran: fortran, shape: shape, offset: offset + int64(hlen)}, nil
}

// ErrChanged reports that a file read again (ReloadNPY) no longer holds
// the numbers first read from it.
var ErrChanged = errors.New("subspace: the input file changed while it was in use")

// ReloadNPY returns, for the real data b read from the .npy file at path
// (by ReadInput or ReadFile, possibly reshaped: any count and shape with
// the file's number of entries, matrix t being the t-th run of m·n of
// them in C order), a function for Options.Reload and
// InputDistanceReload that reads matrix t of the file again into dst, and
// a function that closes the file. The reader checks what it reads: the
// SHA-256 of each matrix's numbers is taken now from b, and a matrix read
// again whose digest differs gives an error wrapping ErrChanged, so that
// nothing is computed from numbers other than those first read. It needs
// data in C order (NumPy's default) of a real dtype ReadInput reads; for
// other files it returns an error wrapping ErrFormat (use them without
// Reload), and for a b that does not match the file's number of entries
// one wrapping ErrShape. The returned function is not safe for concurrent
// use.
func ReloadNPY(path string, b Basis) (reload func(t int, dst []float64) error, closeFile func() error, err error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	fail := func(err error) (func(int, []float64) error, func() error, error) {
		f.Close()
		return nil, nil, fmt.Errorf("%s: %w", path, err)
	}
	h, err := readNPYHead(bufio.NewReader(f))
	if err != nil {
		return fail(err)
	}
	conv, item, parts, err := npyConverter(h.descr)
	if err != nil {
		return fail(err)
	}
	total := int64(1)
	for _, d := range h.shape {
		total = mulSat(total, d)
	}
	L, okL := mulOK(b.Rows, b.Cols)
	all, okAll := mulOK(L, b.Count)
	switch {
	case b.Rows <= 0 || b.Cols <= 0 || b.Count <= 0 || !okL || !okAll:
		return fail(fmt.Errorf("%w: %d matrices of %d×%d", ErrShape, b.Count, b.Rows, b.Cols))
	case h.fortran:
		return fail(fmt.Errorf("%w: npy: Fortran order cannot be read a matrix at a time", ErrFormat))
	case parts != 1:
		return fail(fmt.Errorf("%w: npy: complex data", ErrFormat))
	case len(b.Data) != all || len(h.shape) < 2 || total != int64(all):
		return fail(fmt.Errorf("%w: npy: shape %v does not hold %d matrices of %d×%d", ErrShape, h.shape, b.Count, b.Rows, b.Cols))
	}
	sums := make([][sha256.Size]byte, b.Count)
	raw := make([]byte, L*8)
	for t := range sums {
		sums[t] = digest(b.Data[t*L:(t+1)*L], raw)
	}
	buf := make([]byte, L*item)
	reload = func(t int, dst []float64) error {
		if t < 0 || t >= len(sums) || len(dst) != L {
			return fmt.Errorf("%w: matrix %d of %d into %d entries", ErrShape, t, len(sums), len(dst))
		}
		if _, err := f.ReadAt(buf, h.offset+int64(t)*int64(L)*int64(item)); err != nil {
			return fmt.Errorf("%s: matrix %d: %w", path, t, readFailure(err, "npy: data truncated"))
		}
		for i := range dst {
			v, err := conv(buf[i*item : (i+1)*item])
			if err != nil {
				return fmt.Errorf("%w: %s: matrix %d: %v", ErrFormat, path, t, err)
			}
			dst[i] = v
		}
		if digest(dst, raw) != sums[t] {
			return fmt.Errorf("%w: %s: matrix %d differs from the first reading", ErrChanged, path, t)
		}
		return nil
	}
	return reload, f.Close, nil
}

// digest returns the SHA-256 of the little-endian bytes of v, using raw
// (8·len(v) bytes) as work space.
func digest(v []float64, raw []byte) [sha256.Size]byte {
	for i, x := range v {
		binary.LittleEndian.PutUint64(raw[8*i:], math.Float64bits(x))
	}
	return sha256.Sum256(raw[:8*len(v)])
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
func npyConverter(descr string) (conv func([]byte) (float64, error), item, parts int, err error) {
	if len(descr) < 3 {
		return nil, 0, 0, fmt.Errorf("%w: npy: unsupported dtype %q", ErrFormat, descr)
	}
	var bo binary.ByteOrder = binary.LittleEndian
	switch descr[0] {
	case '<', '|', '=':
	case '>':
		bo = binary.BigEndian
	default:
		return nil, 0, 0, fmt.Errorf("%w: npy: unsupported dtype %q", ErrFormat, descr)
	}
	kind, sz := descr[1], descr[2:]
	size, aerr := strconv.Atoi(sz)
	if aerr != nil {
		return nil, 0, 0, fmt.Errorf("%w: npy: unsupported dtype %q", ErrFormat, descr)
	}
	if kind == 'c' && (size == 8 || size == 16) {
		// complex64 / complex128: two floats of half the size each.
		kind, size, parts = 'f', size/2, 2
	} else {
		parts = 1
	}
	const exact = 1 << 53
	switch {
	case kind == 'f' && size == 8:
		return func(b []byte) (float64, error) { return math.Float64frombits(bo.Uint64(b)), nil }, 8, parts, nil
	case kind == 'f' && size == 4:
		return func(b []byte) (float64, error) { return float64(math.Float32frombits(bo.Uint32(b))), nil }, 4, parts, nil
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
		}, size, 1, nil
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
		}, size, 1, nil
	}
	return nil, 0, 0, fmt.Errorf("%w: npy: unsupported dtype %q (want a float, complex or integer type)", ErrFormat, descr)
}

// WriteNPY writes b as a version 1.0 .npy array of shape (r, m, n), '<f8', C order.
func WriteNPY(wr io.Writer, b Basis) error {
	if err := checkBasis(b); err != nil {
		return err
	}
	bw := bufio.NewWriter(wr)
	writeNPYHeader(bw, "<f8", b.Count, b.Rows, b.Cols)
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
// and the orthonormalisation after it together (0 means DefaultMaxBytes; see
// checkShape). Errors give the line number and the token.
//
// Numbers are plain decimals: an optional sign, digits with an optional
// decimal point, an optional exponent (e or E, optional sign, digits).
// Go-only syntaxes (hexadecimal floats, digit separators "_"), "inf" and
// "nan" are refused, and so is a number that is not zero but lies outside
// the float64 range: beyond ±1.8e308 (ErrNotFinite) or so small that it
// would read as zero (below about 2.5e-324, ErrFormat). Numbers in the
// subnormal range are read with the precision they have there.
func ReadText(rd io.Reader, maxBytes int64) (Basis, error) { return readText(rd, maxBytes, -1) }

// readText is ReadText; size ≥ 0 is the stream's length when known: each
// number takes at least two bytes (a digit and a separator) except the last,
// so a declared count above (size+1)/2 is refused before allocating.
func readText(rd io.Reader, maxBytes, size int64) (Basis, error) {
	return realOnly(readTextInput(rd, maxBytes, size))
}

// readTextInput reads the text format, real or complex (header "r m n
// complex"; see ReadText).
func readTextInput(rd io.Reader, maxBytes, size int64) (Input, error) {
	br := bufio.NewReader(rd)
	if bom, _ := br.Peek(3); bytes.Equal(bom, []byte("\xEF\xBB\xBF")) {
		br.Discard(3) // a UTF-8 byte-order mark, as some editors write
	}
	sc := bufio.NewScanner(br)
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
			return Input{}, fmt.Errorf("%w: text: missing header \"r m n\"", ErrFormat)
		}
		if err != nil {
			return Input{}, err
		}
		v, e := strconv.ParseInt(t, 10, 64)
		if e != nil {
			return Input{}, fmt.Errorf("%w: text: line %d: header entry %s is not an integer", ErrFormat, ln, quoteToken(t))
		}
		dims[i] = v
	}
	// An optional fourth header word "complex" on the header's line
	// marks complex entries.
	isComplex := false
	if len(tokens) > 0 && tokens[0] == "complex" {
		isComplex = true
		tokens = tokens[1:]
	}
	total, err := checkShapeField(dims[0], dims[1], dims[2], maxBytes, isComplex)
	if err != nil {
		return Input{}, err
	}
	if size >= 0 && int64(total) > (size+1)/2 {
		return Input{}, fmt.Errorf("%w: text: truncated: %d numbers declared, a file of %d bytes holds at most %d", ErrFormat, total, size, (size+1)/2)
	}
	// When the stream's length is known, the declared count has been
	// checked against it (and against the memory limit): the array is
	// allocated at its final size, so reading makes no copies (growing by
	// append would hold the old and the new array at once, about twice
	// the data). Otherwise it grows as numbers arrive, so that a header
	// alone cannot make it allocate (a text file is at least twice as large
	// as the count it holds, so growth never exceeds the data's bound).
	start := min(total, 1<<17)
	if size >= 0 {
		start = total
	}
	var data []float64
	var cdata []complex128
	if isComplex {
		cdata = make([]complex128, 0, start)
	} else {
		data = make([]float64, 0, start)
	}
	for len(data)+len(cdata) < total {
		t, ln, err := next()
		if err == io.EOF {
			return Input{}, fmt.Errorf("%w: text: truncated: %d numbers expected, %d found", ErrFormat, total, len(data)+len(cdata))
		}
		if err != nil {
			return Input{}, err
		}
		if isComplex {
			z, perr := parseComplex(t)
			if perr != nil {
				return Input{}, fmt.Errorf("%w: text: line %d: %s %s", perr, ln, quoteToken(t), perr.reason)
			}
			cdata = append(cdata, z)
			continue
		}
		v, perr := parseDecimal(t)
		if perr != nil {
			return Input{}, fmt.Errorf("%w: text: line %d: %s %s", perr, ln, quoteToken(t), perr.reason)
		}
		data = append(data, v)
	}
	if t, ln, err := next(); err == nil {
		return Input{}, fmt.Errorf("%w: text: line %d: unexpected %s after the %d numbers", ErrFormat, ln, quoteToken(t), total)
	} else if err != io.EOF {
		return Input{}, err
	}
	r, m, n := int(dims[0]), int(dims[1]), int(dims[2])
	if isComplex {
		return Input{Field: Complex, Complex: ComplexBasis{Count: r, Rows: m, Cols: n, Data: cdata}}, nil
	}
	return Input{Field: Real, Real: Basis{Count: r, Rows: m, Cols: n, Data: data}}, nil
}

// numberError says why a token is not an acceptable number; it wraps the
// sentinel (ErrFormat or ErrNotFinite).
type numberError struct {
	sentinel error
	reason   string
}

func (e *numberError) Error() string { return e.sentinel.Error() }
func (e *numberError) Unwrap() error { return e.sentinel }

// parseDecimal parses a plain decimal number (see ReadText).
func parseDecimal(t string) (float64, *numberError) {
	i := 0
	if i < len(t) && (t[i] == '+' || t[i] == '-') {
		i++
	}
	digits, nonzero := 0, false
	for ; i < len(t) && t[i] >= '0' && t[i] <= '9'; i++ {
		digits++
		nonzero = nonzero || t[i] != '0'
	}
	if i < len(t) && t[i] == '.' {
		for i++; i < len(t) && t[i] >= '0' && t[i] <= '9'; i++ {
			digits++
			nonzero = nonzero || t[i] != '0'
		}
	}
	if digits > 0 && i < len(t) && (t[i] == 'e' || t[i] == 'E') {
		j := i + 1
		if j < len(t) && (t[j] == '+' || t[j] == '-') {
			j++
		}
		k := j
		for ; k < len(t) && t[k] >= '0' && t[k] <= '9'; k++ {
		}
		if k > j {
			i = k
		}
	}
	if digits == 0 || i != len(t) {
		low := strings.ToLower(strings.TrimLeft(t, "+-"))
		if low == "inf" || low == "infinity" || low == "nan" {
			return 0, &numberError{ErrNotFinite, "is not a finite number"}
		}
		return 0, &numberError{ErrFormat, "is not a plain decimal number"}
	}
	v, err := strconv.ParseFloat(t, 64)
	if err != nil {
		return 0, &numberError{ErrNotFinite, "overflows float64 (beyond ±1.8e308)"}
	}
	if v == 0 && nonzero {
		return 0, &numberError{ErrFormat, "underflows to zero in float64 (below about 2.5e-324)"}
	}
	return v, nil
}

// quoteToken quotes a token for an error message, cut to 32 bytes, so
// that a binary file read as text does not fill the terminal.
func quoteToken(t string) string {
	if len(t) > 32 {
		return strconv.QuoteToASCII(t[:32]) + "…"
	}
	return strconv.QuoteToASCII(t)
}

// parseComplex parses a complex entry of the text format: a plain decimal
// (real), a plain decimal followed by "i" (imaginary, e.g. "-2.5e-3i"), or
// both joined by the imaginary part's sign ("1.5-2i", "0+1e-3i"). The
// parts obey parseDecimal's rules.
func parseComplex(t string) (complex128, *numberError) {
	if !strings.HasSuffix(t, "i") {
		v, err := parseDecimal(t)
		return complex(v, 0), err
	}
	body := t[:len(t)-1]
	// The split is at the last sign that is not the first character and
	// does not follow an exponent letter.
	cut := -1
	for k := len(body) - 1; k > 0; k-- {
		if (body[k] == '+' || body[k] == '-') && body[k-1] != 'e' && body[k-1] != 'E' {
			cut = k
			break
		}
	}
	if cut < 0 {
		v, err := parseDecimal(body)
		return complex(0, v), err
	}
	re, err := parseDecimal(body[:cut])
	if err != nil {
		return 0, err
	}
	im, err := parseDecimal(body[cut:])
	if err != nil {
		return 0, err
	}
	return complex(re, im), nil
}

// WriteComplexText writes b in the complex text format: the header
// "r m n complex", then each entry as re±imi with shortest round-trip
// decimals, one matrix row per line.
func WriteComplexText(wr io.Writer, b ComplexBasis) error {
	if b.Count <= 0 || b.Rows <= 0 || b.Cols <= 0 || len(b.Data) != b.Count*b.Rows*b.Cols {
		return fmt.Errorf("%w: basis of %d matrices of %d×%d with %d entries", ErrShape, b.Count, b.Rows, b.Cols, len(b.Data))
	}
	bw := bufio.NewWriter(wr)
	fmt.Fprintf(bw, "# %d complex matrices of %d×%d, each row-major\n%d %d %d complex\n", b.Count, b.Rows, b.Cols, b.Count, b.Rows, b.Cols)
	for t := 0; t < b.Count; t++ {
		for i := 0; i < b.Rows; i++ {
			row := b.Data[(t*b.Rows+i)*b.Cols : (t*b.Rows+i+1)*b.Cols]
			for j, z := range row {
				if j > 0 {
					bw.WriteByte(' ')
				}
				bw.WriteString(strconv.FormatFloat(real(z), 'g', -1, 64))
				im := strconv.FormatFloat(imag(z), 'g', -1, 64)
				if im[0] != '-' {
					bw.WriteByte('+')
				}
				bw.WriteString(im)
				bw.WriteByte('i')
			}
			bw.WriteByte('\n')
		}
	}
	return bw.Flush()
}

// WriteComplexNPY writes b as a version 1.0 .npy array of shape (r, m, n),
// '<c16', C order.
func WriteComplexNPY(wr io.Writer, b ComplexBasis) error {
	if b.Count <= 0 || b.Rows <= 0 || b.Cols <= 0 || len(b.Data) != b.Count*b.Rows*b.Cols {
		return fmt.Errorf("%w: basis of %d matrices of %d×%d with %d entries", ErrShape, b.Count, b.Rows, b.Cols, len(b.Data))
	}
	bw := bufio.NewWriter(wr)
	writeNPYHeader(bw, "<c16", b.Count, b.Rows, b.Cols)
	var e [8]byte
	for _, z := range b.Data {
		binary.LittleEndian.PutUint64(e[:], math.Float64bits(real(z)))
		bw.Write(e[:])
		binary.LittleEndian.PutUint64(e[:], math.Float64bits(imag(z)))
		bw.Write(e[:])
	}
	return bw.Flush()
}

// writeNPYHeader writes a version 1.0 .npy header for a C-order array of
// shape (r, m, n) and the given dtype, padded to a multiple of 64 bytes.
func writeNPYHeader(bw *bufio.Writer, descr string, r, m, n int) {
	h := fmt.Sprintf("{'descr': '%s', 'fortran_order': False, 'shape': (%d, %d, %d), }", descr, r, m, n)
	pad := 64 - (10+len(h)+1)%64
	if pad == 64 {
		pad = 0
	}
	h += strings.Repeat(" ", pad) + "\n"
	bw.Write(npyMagic)
	bw.Write([]byte{1, 0})
	var l [2]byte
	binary.LittleEndian.PutUint16(l[:], uint16(len(h)))
	bw.Write(l[:])
	bw.WriteString(h)
}
