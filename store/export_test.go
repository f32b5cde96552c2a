package store

import "context"

// Hooks for the external tests of the vote batches (votebatch_test.go).

// BatchVote is one vote of a batch written by VoteBatchTx.
type BatchVote struct {
	Vote   NewVote
	Decide Decider
	Next   *ClaimRequest
}

// BatchOutcome is what the batch answered for one vote.
type BatchOutcome struct {
	Result  VoteResult
	Claim   *Claim
	Retake  int64
	Err     error
	Skipped bool // not written: its item was held elsewhere
}

// ErrNotInserted is the unexported errNotInserted.
var ErrNotInserted = errNotInserted

// VoteBatchTx writes votes in one transaction, as a worker does.
func (s *Store) VoteBatchTx(ctx context.Context, votes []BatchVote) ([]BatchOutcome, error) {
	jobs := make([]*voteJob, len(votes))
	for i, v := range votes {
		jobs[i] = &voteJob{ctx: ctx, v: v.Vote, decide: v.Decide, next: v.Next}
	}
	outs, err := s.writeVotes(ctx, jobs, batchVoteSQL)
	if err != nil {
		return nil, err
	}
	res := make([]BatchOutcome, len(outs))
	for i, o := range outs {
		res[i] = BatchOutcome{Result: o.res, Claim: o.claim, Retake: o.retake, Err: o.err, Skipped: o.skipped}
	}
	return res, nil
}

// SplitVoteBatch runs splitVoteBatch on votes made in the given contexts
// and returns the item ids of the batch and of the carry, and what the
// votes answered straight away (by index).
func SplitVoteBatch(ctxs []context.Context, votes []NewVote) (batch, carry []int64, answered map[int]error) {
	jobs := make([]*voteJob, len(votes))
	for i, v := range votes {
		jobs[i] = &voteJob{ctx: ctxs[i], v: v, done: make(chan voteOutcome, 1)}
	}
	b, c := splitVoteBatch(jobs)
	for _, j := range b {
		batch = append(batch, j.v.ItemID)
	}
	for _, j := range c {
		carry = append(carry, j.v.ItemID)
	}
	answered = map[int]error{}
	for i, j := range jobs {
		select {
		case out := <-j.done:
			answered[i] = out.err
		default:
		}
	}
	return batch, carry, answered
}
