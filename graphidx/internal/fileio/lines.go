package fileio

import (
	"bufio"
	"errors"
	"io"
)

// LineReader reads lines of bounded length and counts lines and bytes.
type LineReader struct {
	br      *bufio.Reader
	buf     []byte
	max     int
	Line    int // number of the line last returned (1-based)
	Bytes   int64
	TooLong bool // the line last returned was truncated
}

// NewLineReader reads r in lines of at most max bytes (terminator not
// counted), through a 64 KiB buffer. Not safe for concurrent use.
func NewLineReader(r io.Reader, max int) *LineReader {
	return &LineReader{br: bufio.NewReaderSize(r, 64<<10), max: max}
}

// Next returns the next line without its line terminator ("\n" or "\r\n").
// A line longer than max is consumed to its end and returned empty with
// TooLong set. It returns io.EOF when the input is exhausted.
func (l *LineReader) Next() ([]byte, error) {
	l.buf = l.buf[:0]
	l.TooLong = false
	started := false
	for {
		chunk, err := l.br.ReadSlice('\n')
		l.Bytes += int64(len(chunk))
		if len(chunk) > 0 {
			started = true
		}
		if !l.TooLong {
			if len(l.buf)+len(chunk) > l.max+2 { // +2 for the terminator
				l.TooLong = true
				l.buf = l.buf[:0]
			} else {
				l.buf = append(l.buf, chunk...)
			}
		}
		switch {
		case err == nil:
			l.Line++
			return l.trim(), nil
		case errors.Is(err, bufio.ErrBufferFull):
			continue
		case errors.Is(err, io.EOF):
			if !started {
				return nil, io.EOF
			}
			l.Line++
			return l.trim(), nil
		default:
			return nil, err
		}
	}
}

func (l *LineReader) trim() []byte {
	b := l.buf
	if len(b) > 0 && b[len(b)-1] == '\n' {
		b = b[:len(b)-1]
	}
	if len(b) > 0 && b[len(b)-1] == '\r' {
		b = b[:len(b)-1]
	}
	if !l.TooLong && len(b) > l.max {
		l.TooLong = true
		b = b[:0]
	}
	return b
}
