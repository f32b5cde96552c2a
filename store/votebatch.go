package store

import (
	"context"
	"fmt"
	"slices"
	"sync"
	"time"
)

// Votes that arrive together share a transaction. Each vote and each
// claim is still its own statement (voteSQL, claimSQL with its check), in
// the order and with the locks a vote of its own would take, but the
// BEGIN, the COMMIT and the round trips are paid once per batch instead
// of once per vote: a busy crowd's votes then cost the database markedly
// less (see BENCHMARKS.md). A worker takes the first waiting vote at once,
// so a lone vote waits for no one; only votes that queue while the workers
// are busy are combined.
//
// A batch fails or succeeds as a whole. When it fails (a deadlock, a
// Decider error, a vote whose statement raises), every vote in it is
// tried again in a transaction of its own, where it fails or succeeds by
// itself, exactly as without batching.

// maxVoteBatch caps the votes in one transaction, so one batch holds its
// item locks only briefly.
const maxVoteBatch = 16

// voteBatchTimeout bounds one batch's database work; a vote's own context
// cannot, since the batch serves several requests.
const voteBatchTimeout = 30 * time.Second

// voteJob is one RecordVoteAndClaim call waiting for a batch.
type voteJob struct {
	ctx    context.Context
	v      NewVote
	decide Decider
	next   *ClaimRequest
	done   chan voteOutcome // buffered: a worker never waits on a caller
	passed int              // batches that passed over its item (held elsewhere)
}

// maxPassedOver is how many batches may pass over a vote's item before
// the vote is made alone, where it waits for the item.
const maxPassedOver = 2

// voteOutcome is what voteAndCommit would have returned for the job, or
// alone when the batch failed and the vote must be tried by itself.
type voteOutcome struct {
	res     VoteResult
	claim   *Claim
	retake  int64
	err     error
	alone   bool
	skipped bool // its item was held elsewhere: nothing written
}

// voteBatcher holds the queue of votes and starts its workers on first use.
type voteBatcher struct {
	start   sync.Once
	stop    sync.Once
	jobs    chan *voteJob
	quit    chan struct{}
	workers int
}

func newVoteBatcher(maxConns int32) *voteBatcher {
	// Three quarters of the pool: the rest serves sessions, claims and
	// pages while every worker holds a connection. With the 8 connections
	// of this project's 2-core machine, 2, 4, 6 and 8 workers were
	// measured with BenchmarkVoteAndClaim and 6 gave the most votes/s.
	return &voteBatcher{jobs: make(chan *voteJob), quit: make(chan struct{}), workers: max(1, int(maxConns)*3/4)}
}

func (vb *voteBatcher) close() { vb.stop.Do(func() { close(vb.quit) }) }

// batchedVote hands the vote to a worker and waits for its outcome.
func (s *Store) batchedVote(ctx context.Context, v NewVote, decide Decider, next *ClaimRequest) voteOutcome {
	vb := s.votes
	vb.start.Do(func() {
		for range vb.workers {
			go s.voteWorker()
		}
	})
	j := &voteJob{ctx: ctx, v: v, decide: decide, next: next, done: make(chan voteOutcome, 1)}
	select {
	case vb.jobs <- j:
	case <-vb.quit:
		return voteOutcome{alone: true}
	case <-ctx.Done():
		return voteOutcome{err: ctx.Err()}
	}
	select {
	case out := <-j.done:
		return out
	case <-ctx.Done():
		// The vote may still be stored; a retry with its id finds it.
		return voteOutcome{err: ctx.Err()}
	}
}

// voteWorker runs batches until the store closes: it waits for one vote,
// adds the votes already waiting, and writes them in one transaction.
func (s *Store) voteWorker() {
	vb := s.votes
	var carry []*voteJob
	for {
		batch := carry
		if len(batch) == 0 {
			select {
			case j := <-vb.jobs:
				batch = append(batch, j)
			case <-vb.quit:
				return
			}
		}
	fill:
		for len(batch) < maxVoteBatch {
			select {
			case j := <-vb.jobs:
				batch = append(batch, j)
			default:
				break fill
			}
		}
		batch, carry = splitVoteBatch(batch)
		carry = append(s.runVoteBatch(batch), carry...)
	}
}

// splitVoteBatch keeps one vote per labeller in the batch and passes the
// rest on to the next: two claims for one labeller in one transaction
// would see each other's item as the labeller's own claim to resume. It
// also answers the votes whose callers have given up. The batch is sorted
// by item, so batches lock items in one order and cannot deadlock on them.
func splitVoteBatch(jobs []*voteJob) (batch, carry []*voteJob) {
	seen := make(map[int64]bool, len(jobs))
	for _, j := range jobs {
		switch {
		case j.ctx.Err() != nil:
			j.done <- voteOutcome{err: j.ctx.Err()}
		case seen[j.v.LabellerID]:
			carry = append(carry, j)
		default:
			seen[j.v.LabellerID] = true
			batch = append(batch, j)
		}
	}
	slices.SortStableFunc(batch, func(a, b *voteJob) int {
		switch {
		case a.v.ItemID < b.v.ItemID:
			return -1
		case a.v.ItemID > b.v.ItemID:
			return 1
		}
		return 0
	})
	return batch, carry
}

// runVoteBatch writes the batch and answers each vote, except those whose
// item another transaction held: it returns them for the next batch (or,
// passed over too often, answers them to be made alone).
func (s *Store) runVoteBatch(jobs []*voteJob) (again []*voteJob) {
	if len(jobs) == 0 {
		return nil
	}
	ctx, cancel := context.WithTimeout(context.Background(), voteBatchTimeout)
	defer cancel()
	outs, err := s.safeVoteBatchTx(ctx, jobs)
	for i, j := range jobs {
		switch {
		case err != nil:
			j.done <- voteOutcome{alone: true}
		case outs[i].skipped && j.passed < maxPassedOver:
			j.passed++
			again = append(again, j)
		case outs[i].skipped:
			j.done <- voteOutcome{alone: true}
		default:
			j.done <- outs[i]
		}
	}
	return again
}

// safeVoteBatchTx is writeVotes for a batch, with a panic (in a Decider,
// say) turned into the batch's failure: the votes are then made alone, in
// their requests' goroutines, where the server's recovery answers it.
func (s *Store) safeVoteBatchTx(ctx context.Context, jobs []*voteJob) (outs []voteOutcome, err error) {
	defer func() {
		if r := recover(); r != nil {
			outs, err = nil, fmt.Errorf("vote batch: panic: %v", r)
		}
	}()
	return s.writeVotes(ctx, jobs, batchVoteSQL)
}
