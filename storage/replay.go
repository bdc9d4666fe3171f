package storage

import "liftyard/acquire"

// ReplayBlocks calls fn with every stored block of run id in the order they
// arrived: the blocks of all sources merged by their host receive time (ties
// by source name), each source in its own stored order. Replaying a run this
// way feeds the recorder's stages as the live run did, so channels joined
// across sources meet again (RawBlocks, source by source, does not). Reading
// is chunked as in RawBlocks; fn runs outside any transaction.
func (s *Store) ReplayBlocks(id uint64, fn func(acquire.Block) error) error {
	sources, err := s.rawSources(id)
	if err != nil {
		return err
	}
	type head struct {
		it *blockIter
		b  acquire.Block
		ok bool
	}
	heads := make([]*head, 0, len(sources))
	for _, src := range sources {
		h := &head{it: s.newBlockIter(id, src)}
		if h.b, h.ok, err = h.it.next(); err != nil {
			return err
		}
		heads = append(heads, h)
	}
	for {
		// A handful of sources: a linear scan beats a heap.
		var pick *head
		for _, h := range heads {
			if h.ok && (pick == nil || h.b.Received.Before(pick.b.Received)) {
				pick = h
			}
		}
		if pick == nil {
			return nil
		}
		if err := fn(pick.b); err != nil {
			return err
		}
		if pick.b, pick.ok, err = pick.it.next(); err != nil {
			return err
		}
	}
}
