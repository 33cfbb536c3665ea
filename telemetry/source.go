package telemetry

import (
	"bufio"
	"compress/gzip"
	"errors"
	"fmt"
	"io"
	"os"
)

// Source is where telemetry bytes come from: a file, standard input, a serial port or a
// pseudo-terminal. Name is what error messages call it (a file name, "stdin", a port path).
// Every Source is read through the same Scanner.
type Source interface {
	io.ReadCloser
	Name() string
}

// gzipMagic starts every gzip stream (RFC 1952, section 2.3.1: ID1 = 31, ID2 = 139).
var gzipMagic = [2]byte{0x1f, 0x8b}

// OpenFile opens a telemetry file or capture for reading. A gzip-compressed file is
// recognised by its first two bytes (the gzip magic number), not by its name, and is
// decompressed on the fly; anything else is read as is. The path "-" means standard input
// (see Stdin).
//
// Errors name the file: "telemetry: open run.txt: no such file or directory",
// "telemetry: run.gz: bad gzip header: ...".
func OpenFile(path string) (Source, error) {
	if path == "-" {
		return Stdin(), nil
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("telemetry: %w", CleanPathError(err))
	}
	if fi, err := f.Stat(); err == nil && fi.IsDir() {
		f.Close()
		return nil, fmt.Errorf("telemetry: %s is a directory, not a telemetry file", SanitizeN([]byte(path), 200))
	}
	src, err := newReaderSource(path, f, f)
	if err != nil {
		f.Close()
		return nil, err
	}
	return src, nil
}

// Stdin returns standard input as a Source named "stdin". Like OpenFile it decompresses a
// gzip stream when the first bytes are the gzip magic number. Closing it does not close
// the process's standard input. The gzip check waits for the first two bytes (or EOF).
func Stdin() Source {
	return &lazySource{name: "stdin", r: os.Stdin}
}

// NewSource makes a Source named name from any byte stream r, decompressing it when its
// first two bytes are the gzip magic number, as OpenFile does. Close closes c (when not
// nil). It is for callers that wrap the raw stream, e.g. to count the bytes read for a
// progress bar; it reads the first bytes of r to decide.
func NewSource(name string, r io.Reader, c io.Closer) (Source, error) {
	return newReaderSource(name, r, c)
}

// readerSource reads a plain or gzip stream and closes the underlying file.
type readerSource struct {
	name string
	r    io.Reader
	gz   *gzip.Reader
	c    io.Closer
}

// newReaderSource peeks at the first bytes of r to decide between plain and gzip.
func newReaderSource(name string, r io.Reader, c io.Closer) (*readerSource, error) {
	br := bufio.NewReaderSize(r, 64<<10)
	s := &readerSource{name: name, r: br, c: c}
	head, err := br.Peek(2)
	if err != nil && !errors.Is(err, io.EOF) {
		return nil, fmt.Errorf("telemetry: read %s: %w", SanitizeN([]byte(name), 200), CleanPathError(err))
	}
	if len(head) == 2 && head[0] == gzipMagic[0] && head[1] == gzipMagic[1] {
		gz, err := gzip.NewReader(br)
		if err != nil {
			return nil, fmt.Errorf("telemetry: %s: bad gzip data: %w", SanitizeN([]byte(name), 200), err)
		}
		s.gz = gz
		s.r = gz
	}
	return s, nil
}

func (s *readerSource) Read(p []byte) (int, error) {
	n, err := s.r.Read(p)
	if err != nil && !errors.Is(err, io.EOF) && s.gz != nil {
		err = fmt.Errorf("telemetry: %s: bad gzip data: %w", SanitizeN([]byte(s.name), 200), err)
	}
	return n, err
}

func (s *readerSource) Name() string { return s.name }

func (s *readerSource) Close() error {
	var err error
	if s.gz != nil {
		err = s.gz.Close()
	}
	if s.c != nil {
		if cerr := s.c.Close(); err == nil {
			err = cerr
		}
	}
	return err
}

// lazySource defers the gzip check of a stream to the first Read, so that Stdin never
// blocks when it is only created.
type lazySource struct {
	name string
	r    io.Reader
	src  *readerSource
	err  error
}

func (s *lazySource) Read(p []byte) (int, error) {
	if s.src == nil && s.err == nil {
		s.src, s.err = newReaderSource(s.name, s.r, nil)
	}
	if s.err != nil {
		return 0, s.err
	}
	return s.src.Read(p)
}

func (s *lazySource) Name() string { return s.name }

func (s *lazySource) Close() error {
	if s.src != nil {
		return s.src.Close()
	}
	return nil
}
