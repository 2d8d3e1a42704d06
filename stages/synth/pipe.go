package synth

// pipe hands serialized corpus bytes to a consumer (a compressing writer)
// running on its own goroutine, so generation and compression use two
// cores. Units are consumed in the order they were sent, so the bytes on
// disk are exactly those of a direct write.
type pipe struct {
	cur     []byte
	ch      chan []byte
	free    chan []byte
	done    chan error
	closed  bool
	consume func([]byte) error
}

// Pipe tuning.
const (
	// pipeChunk is the size at which jsonl writers hand a buffer over:
	// large enough to amortise the hand-over, small enough to stay in cache.
	pipeChunk = 1 << 20
	// pipeBuffers in flight: one being filled, one queued, one consumed.
	pipeBuffers = 3
)

func newPipe(consume func([]byte) error) *pipe {
	p := &pipe{
		ch:      make(chan []byte, pipeBuffers-1),
		free:    make(chan []byte, pipeBuffers),
		done:    make(chan error, 1),
		consume: consume,
	}
	for i := 0; i < pipeBuffers-1; i++ {
		p.free <- make([]byte, 0, pipeChunk+pipeChunk/4)
	}
	p.cur = make([]byte, 0, pipeChunk+pipeChunk/4)
	go func() {
		var err error
		for b := range p.ch {
			if err == nil {
				err = p.consume(b)
			}
			p.free <- b[:0]
		}
		p.done <- err
	}()
	return p
}

// buf returns the buffer to append the next bytes to; call commit with the
// grown buffer.
func (p *pipe) buf() []byte { return p.cur }

// commit stores the grown buffer and hands it over when it is full.
func (p *pipe) commit(b []byte) {
	p.cur = b
	if len(p.cur) >= pipeChunk {
		p.send()
	}
}

// send hands the current buffer over as one unit.
func (p *pipe) send() {
	if len(p.cur) == 0 {
		return
	}
	p.ch <- p.cur
	p.cur = <-p.free
}

// close hands over what is left, waits for the consumer and returns its
// first error.
func (p *pipe) close() error {
	if p.closed {
		return nil
	}
	p.closed = true
	p.send()
	close(p.ch)
	return <-p.done
}
