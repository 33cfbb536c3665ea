package virtual

import (
	"context"
	"errors"
	"io"
)

// Stream runs the board in real time (scaled by Speed) in a goroutine and returns its
// output as a reader, for use in-process (the demo screen) with no pseudo-terminal. Host
// lines go in with Send. Reading ends with io.EOF at the scenario's limit or when ctx
// ends; Close stops the board. The board's writes wait for the reader, so a reader that
// falls behind sees the lines late, never lost.
func (b *Board) Stream(ctx context.Context) io.ReadCloser {
	ctx, cancel := context.WithCancel(ctx)
	pr, pw := io.Pipe()
	go func() {
		err := b.Run(ctx, pw, true)
		if errors.Is(err, context.Canceled) || errors.Is(err, context.DeadlineExceeded) {
			err = nil
		}
		pw.CloseWithError(err) // nil: the reader sees io.EOF
	}()
	return &stream{r: pr, cancel: cancel}
}

type stream struct {
	r      *io.PipeReader
	cancel context.CancelFunc
}

func (s *stream) Read(p []byte) (int, error) { return s.r.Read(p) }

func (s *stream) Close() error {
	s.cancel()
	return s.r.Close()
}
