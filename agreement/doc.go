// Package agreement turns noisy, disagreeing votes into consensus labels and
// measures how far the labellers agree. It is pure statistics: no I/O, no
// database, and no imports of Concord's other packages (not even taxonomy;
// a label tree arrives as a parent-id slice). Callers convert names to
// dense integer ids at the edges with Builder, pass flat slices (Votes), and
// turn ids back into names with Builder's name lists.
//
// # Consensus
//
// MajorityVote counts votes per item and label. A tie is reported (Tied,
// TiedLabels, Label -1), never broken by the order in which votes arrived.
//
// DawidSkene fits the model of Dawid & Skene (1979, "Maximum likelihood
// estimation of observer error-rates using the EM algorithm", Applied
// Statistics 28(1) 20-28): each labeller has a full confusion matrix, the
// classes have priors, and EM alternates between the posteriors of the true
// classes and the matrices. Concord's choices:
//   - EM starts from each item's vote shares (the paper's eq. 3.1), so a run
//     is deterministic; like any EM it reaches a local optimum, not
//     necessarily the global one.
//   - Additive (symmetric Dirichlet) smoothing, DefaultSmoothing = 0.1 per
//     cell and per prior, keeps a labeller with few votes from getting zero
//     cells that would veto a class outright; NoSmoothing gives the
//     paper's plain maximum likelihood.
//   - Items with a known class (gold answers, lead decisions) are held
//     one-hot, so they anchor the matrices.
//   - EM stops when the log-likelihood per vote moves by less than
//     Tolerance, or after MaxIterations.
//   - The E-step works in log space over fixed item chunks in parallel,
//     with a per-vote offset into a [labeller][label][class] table, and the
//     M-step over labeller blocks; partial sums are reduced in a fixed order,
//     so the answer does not depend on the number of cores.
//
// The tests check it against values recomputed (not published) for the
// paper's anaesthesia data, and against three public crowd sets with gold
// answers. Hierarchy.RollUp reports the deepest node of a label tree whose
// summed posterior reaches a target ("plastic, 0.97" when the bottle type
// is disputed), and AtDepth gives a class's ancestor at a depth.
//
// # Vote policy
//
// VotePolicy{MinVotes, MaxVotes, Target} gives each item a status: done,
// needs_votes (with the least number of further votes that could settle
// it) or review (MaxVotes reached, still below Target). Items needing votes
// are ordered by the expected gain in correctness from one more vote: with
// the current posterior p and the vote-weighted average confusion matrix A,
//
//	gain = sum_j max_t p_t A[t][j] - max_t p_t,
//
// the expected rise in the probability that the item's MAP label is right
// after the next vote. This is a one-step look-ahead (knowledge-gradient)
// policy for a 0-1 reward, after Frazier, Powell & Dayanik (2008, SIAM J.
// Control and Optimization 47(5), "A knowledge-gradient policy for
// sequential information collection"); that repeated labelling of the most
// uncertain items pays off is the finding of Sheng, Provost & Ipeirotis
// (2008, KDD, "Get another label? Improving data quality and data mining
// using multiple, noisy labelers"). Both citations are from memory. Being
// myopic, the gain is 0 for an item that one vote cannot overturn even if
// several could; Queue then falls back to lower confidence first. The
// least number of further votes is the smallest n for which n unanimous
// votes for the current label from the average labeller reach Target.
// Use a Dawid-Skene consensus here: majority-vote shares are not
// posteriors.
//
// # Labeller reliability
//
// Reliability reports per labeller: votes; accuracy estimated from the
// Dawid-Skene matrix as sum_k prior_k * pi_kk; accuracy on gold items with
// a Wilson (1927, JASA 22(158) 209-212) score interval; agreement and
// Cohen's kappa with the leave-one-out majority of the other votes on each
// item; median seconds per vote; and flags (too fast, near random,
// one label over-used) with thresholds in ReliabilityOptions.
//
// Flags and accuracies are estimates from noisy data, meant to start a
// conversation between a lead and a labeller. Hard items, unclear
// instructions or a taxonomy that does not fit the images lower them too.
// Where they feed into pay, hours or whether someone keeps working, follow
// local labour law and the agreements that apply, and let a person decide.
//
// # Agreement statistics
//
// Cohen's kappa (weighted and unweighted, with standard errors), Fleiss'
// kappa and Krippendorff's alpha measure agreement beyond chance; see their
// own doc comments for sources and conventions.
package agreement
