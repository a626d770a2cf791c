// Package reclaim bounds the garbage that receiving or sending a large data
// set in chunks leaves behind.
//
// Streaming a fit's rows allocates one message per chunk, and every chunk
// is garbage once its rows are copied into (or out of) the single array
// that holds the data set. The Go collector paces itself on the live heap:
// once that array is live, it lets about as much garbage again accumulate
// before it collects (GOGC=100), so a process that receives n bytes of rows
// peaks near 2·n. A Budget counts the chunk bytes a stream has finished with
// and runs a collection whenever they reach the budget, so the peak stays
// near n plus the budget. Streams smaller than the budget never collect.
package reclaim

import "runtime"

// DefaultBytes is the budget mixd uses for its fit streams: 64 MiB, or 32
// chunks of the plugin protocol's 2 MiB.
const DefaultBytes = 64 << 20

// Budget counts the bytes of finished chunks of one stream. It is not safe
// for concurrent use; each stream keeps its own.
type Budget struct {
	limit   int64
	pending int64
	collect func()
}

// New returns a Budget that collects after every limit bytes of finished
// chunks. A limit of zero or less disables it.
func New(limit int64) *Budget {
	return &Budget{limit: limit, collect: runtime.GC}
}

// Done records that n bytes of chunk messages are no longer referenced and
// collects once the total since the last collection reaches the budget.
// A nil Budget does nothing.
func (b *Budget) Done(n int) {
	if b == nil || b.limit <= 0 || n <= 0 {
		return
	}
	b.pending += int64(n)
	if b.pending >= b.limit {
		b.pending = 0
		b.collect()
	}
}
