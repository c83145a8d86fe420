package stages

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"regexp"
	"strconv"
)

// The compact samples are 2-D little-endian uint32 arrays in NumPy's .npy
// format, version 1.0 (magic "\x93NUMPY", version bytes, a 2-byte header
// length, an ASCII dict header padded with spaces to a multiple of 64
// bytes and ended by a newline, then the data in C order). They are
// encoded and decoded here directly: the reflection-based writer of the
// npyio library took 8% of a small lattice's sampling time; the library
// reads them back in the tests (format check).

// EncodeCounts writes row-major uint32 counts with cols columns as a 2-D
// .npy array (dtype <u4).
func EncodeCounts(raw []uint32, cols int) ([]byte, error) {
	if cols < 1 || len(raw) == 0 || len(raw)%cols != 0 {
		return nil, fmt.Errorf("encoding samples: %d values are not whole rows of %d", len(raw), cols)
	}
	header := fmt.Sprintf("{'descr': '<u4', 'fortran_order': False, 'shape': (%d, %d), }", len(raw)/cols, cols)
	pad := 64 - (10+len(header)+1)%64
	if pad == 64 {
		pad = 0
	}
	header += string(bytes.Repeat([]byte{' '}, pad)) + "\n"
	out := make([]byte, 0, 10+len(header)+4*len(raw))
	out = append(out, "\x93NUMPY\x01\x00"...)
	out = binary.LittleEndian.AppendUint16(out, uint16(len(header)))
	out = append(out, header...)
	for _, v := range raw {
		out = binary.LittleEndian.AppendUint32(out, v)
	}
	return out, nil
}

var countsHeader = regexp.MustCompile(`^\{'descr': '<u4', 'fortran_order': False, 'shape': \((\d+), (\d+)\), \} *\n$`)

// DecodeCounts reads a 2-D uint32 .npy array written by EncodeCounts (or by
// NumPy with the same header, format 1.0 or 2.0), returning it row-major.
func DecodeCounts(b []byte) (raw []uint32, rows, cols int, err error) {
	bad := func(why string) ([]uint32, int, int, error) {
		return nil, 0, 0, fmt.Errorf("reading samples: %s", why)
	}
	if len(b) < 10 || string(b[:6]) != "\x93NUMPY" {
		return bad("not a .npy file")
	}
	var hlen, start int
	switch b[6] {
	case 1:
		hlen, start = int(binary.LittleEndian.Uint16(b[8:10])), 10
	case 2, 3:
		if len(b) < 12 {
			return bad("truncated header")
		}
		hlen, start = int(binary.LittleEndian.Uint32(b[8:12])), 12
	default:
		return bad(fmt.Sprintf(".npy version %d.%d", b[6], b[7]))
	}
	if start+hlen > len(b) {
		return bad("truncated header")
	}
	m := countsHeader.FindStringSubmatch(string(b[start : start+hlen]))
	if m == nil {
		return bad(fmt.Sprintf("want a 2-D little-endian uint32 array in C order, have header %q", b[start:start+hlen]))
	}
	rows, err1 := strconv.Atoi(m[1])
	cols, err2 := strconv.Atoi(m[2])
	data := b[start+hlen:]
	if err1 != nil || err2 != nil || rows < 0 || cols < 1 || rows > len(data) || cols > len(data) || len(data) != 4*rows*cols {
		return bad(fmt.Sprintf("shape (%s, %s) does not match %d data bytes", m[1], m[2], len(data)))
	}
	raw = make([]uint32, rows*cols)
	for i := range raw {
		raw[i] = binary.LittleEndian.Uint32(data[4*i:])
	}
	return raw, rows, cols, nil
}
