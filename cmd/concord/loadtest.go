package main

import (
	"bufio"
	"context"
	"crypto/rand"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	mrand "math/rand/v2"
	"net/http"
	"net/http/cookiejar"
	"net/url"
	"os"
	"slices"
	"strings"
	"sync"
	"text/tabwriter"
	"time"

	"github.com/concord-labs/concord/store"
	"github.com/concord-labs/concord/web"
)

const loadtestUsage = `loadtest --url URL --project SLUG [--labellers N] [--duration D] [--json]
         [--logins FILE [--password PW | --password-stdin]]

Without --logins, loadtest creates its own labeller accounts in the project
(logins loadtest-<run>-<n>) through DATABASE_URL or the default database.
A --logins file has one account a line: "login password", or just "login"
when --password or --password-stdin gives the password for all of them.`

func runLoadtest(ctx context.Context, e *env, args []string) error {
	fs := newFlagSet(e, "loadtest", loadtestUsage)
	var cfg loadConfig
	fs.StringVar(&cfg.baseURL, "url", "http://127.0.0.1:8080", "address of the running concord serve")
	fs.StringVar(&cfg.project, "project", "", "slug of the project to label")
	fs.IntVar(&cfg.labellers, "labellers", 10, "simulated labellers working at once")
	fs.DurationVar(&cfg.duration, "duration", 10*time.Second, "how long to drive the load")
	fs.DurationVar(&cfg.timeout, "request-timeout", 10*time.Second, "give up on one request after this long")
	logins := fs.String("logins", "", "file of existing accounts to use instead of creating them")
	password := fs.String("password", "", "password for the --logins accounts that list none")
	pwStdin := fs.Bool("password-stdin", false, "read that password from the first line of standard input")
	asJSON := fs.Bool("json", false, "print one JSON object instead of the tables")
	if err := parseFlags(e, fs, args); err != nil {
		return err
	}
	if cfg.project == "" {
		return usagef("loadtest: need --project")
	}
	if cfg.labellers < 1 || cfg.duration <= 0 {
		return usagef("loadtest: --labellers must be at least 1 and --duration positive")
	}
	if _, err := url.Parse(cfg.baseURL); err != nil || !strings.HasPrefix(cfg.baseURL, "http") {
		return usagef("loadtest: --url %q is not an http(s) address", cfg.baseURL)
	}
	if *pwStdin {
		line, _ := bufio.NewReader(e.stdin).ReadString('\n')
		*password = strings.TrimRight(line, "\r\n")
		if *password == "" {
			return usagef("loadtest: --password-stdin given but no password on standard input")
		}
	}
	var accounts []loadAccount
	var err error
	if *logins != "" {
		accounts, err = readLoginsFile(*logins, *password)
		if err != nil {
			return err
		}
		if len(accounts) < cfg.labellers {
			return usagef("loadtest: %s lists %d accounts, fewer than --labellers %d", *logins, len(accounts), cfg.labellers)
		}
		accounts = accounts[:cfg.labellers]
	} else {
		s, closeDB, err := openStore(ctx, e)
		if err != nil {
			return err
		}
		accounts, err = createLoadAccounts(ctx, s, cfg.project, cfg.labellers)
		closeDB()
		if err != nil {
			return err
		}
	}
	res, err := runLoad(ctx, cfg, accounts)
	if err != nil {
		return err
	}
	if err := res.nothingToVoteOn(cfg.project); err != nil {
		return err
	}
	rep := res.report()
	if *asJSON {
		enc := json.NewEncoder(e.stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(rep)
	}
	return rep.write(e.stdout)
}

// loadConfig says where and how hard to drive the labelling endpoints.
type loadConfig struct {
	baseURL   string
	project   string
	labellers int
	duration  time.Duration
	timeout   time.Duration
	// started, when not nil, is closed when every labeller has logged in
	// and the clock starts (the crash test times its kill from it).
	started chan struct{}
}

// loadAccount is one labeller's login.
type loadAccount struct {
	login, password string
}

// readLoginsFile reads "login [password]" lines; blank lines and lines
// starting with # are skipped.
func readLoginsFile(path, password string) ([]loadAccount, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("read logins: %w", err)
	}
	defer f.Close()
	var out []loadAccount
	sc := bufio.NewScanner(f)
	for n := 1; sc.Scan(); n++ {
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		fields := strings.Fields(line)
		a := loadAccount{login: fields[0], password: password}
		switch {
		case len(fields) == 2:
			a.password = fields[1]
		case len(fields) > 2:
			return nil, fmt.Errorf("%s:%d: want \"login password\", got %d fields", path, n, len(fields))
		case password == "":
			return nil, fmt.Errorf("%s:%d: no password for login %q (give one on the line or with --password)", path, n, a.login)
		}
		out = append(out, a)
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("read %s: %w", path, err)
	}
	return out, nil
}

// createLoadAccounts adds n labellers with one random password to the
// project. The run id in their logins keeps runs apart, so a second run
// never meets the first run's votes or claims.
func createLoadAccounts(ctx context.Context, s *store.Store, slug string, n int) ([]loadAccount, error) {
	p, err := s.ProjectBySlug(ctx, slug)
	if err != nil {
		return nil, fmt.Errorf("loadtest project %q: %w", slug, err)
	}
	run := randomHex(4)
	password := randomHex(12)
	// One hash for all: argon2id is slow on purpose, and the accounts are throwaway.
	hash, err := web.HashPassword(password)
	if err != nil {
		return nil, err
	}
	out := make([]loadAccount, n)
	for i := range out {
		login := fmt.Sprintf("loadtest-%s-%d", run, i+1)
		u, err := s.CreateUser(ctx, store.User{Login: login, DisplayName: login, Role: store.RoleLabeller, PasswordHash: hash})
		if err != nil {
			return nil, fmt.Errorf("create load labeller %s: %w", login, err)
		}
		if err := s.AddMember(ctx, p.ID, u.ID); err != nil {
			return nil, fmt.Errorf("add load labeller %s to %s: %w", login, slug, err)
		}
		out[i] = loadAccount{login: login, password: password}
	}
	return out, nil
}

func randomHex(n int) string {
	b := make([]byte, n)
	rand.Read(b)
	return hex.EncodeToString(b)
}

// newUUID makes a random (version 4) UUID, as a browser's crypto.randomUUID does.
func newUUID() string {
	var b [16]byte
	rand.Read(b[:])
	b[6] = b[6]&0x0f | 0x40
	b[8] = b[8]&0x3f | 0x80
	h := hex.EncodeToString(b[:])
	return h[0:8] + "-" + h[8:12] + "-" + h[12:16] + "-" + h[16:20] + "-" + h[20:]
}

// ---- results and statistics ----

// ackedVote is a vote the server acknowledged with a 2xx and its id.
type ackedVote struct {
	ID     string
	ItemID int64
	Login  string
}

// loadResult is what one run saw.
type loadResult struct {
	labellers int
	elapsed   time.Duration
	claim     latencies // one "claim next" request
	vote      latencies // one vote request, a retry included
	cycle     latencies // vote plus the claim of the next item
	acked     []ackedVote
	retries   int
	// duplicates are retried votes the server recognised as stored already.
	duplicates int
	// noWork counts claims that found nothing left for the labeller.
	noWork int
	errors map[string]int
}

func (r *loadResult) merge(o *loadResult) {
	r.claim.merge(&o.claim)
	r.vote.merge(&o.vote)
	r.cycle.merge(&o.cycle)
	r.acked = append(r.acked, o.acked...)
	r.retries += o.retries
	r.duplicates += o.duplicates
	r.noWork += o.noWork
	for k, v := range o.errors {
		r.errors[k] += v
	}
}

// nothingToVoteOn says why a run that cast no vote measured nothing when
// every claim came back empty: a report of zero votes and zero errors
// would read as a server that takes no votes rather than a finished project.
func (r *loadResult) nothingToVoteOn(project string) error {
	if len(r.acked) > 0 || r.noWork == 0 || r.noWork != len(r.claim.samples) {
		return nil
	}
	return fmt.Errorf("loadtest: project %s has nothing left to vote on: all %d claims found no open item, so no vote was cast; "+
		"import more images (concord import --project %s FOLDER) or raise the project's maximum votes per item on its setup page, then run again",
		project, r.noWork, project)
}

func (r *loadResult) fail(kind string) {
	if r.errors == nil {
		r.errors = map[string]int{}
	}
	r.errors[kind]++
}

// latencies keeps every sample: a run of a minute at a few thousand
// requests a second is a few MB, and exact percentiles need no bucket
// error analysis.
type latencies struct {
	samples []time.Duration
	sorted  bool
}

func (l *latencies) add(d time.Duration) {
	l.samples = append(l.samples, d)
	l.sorted = false
}

func (l *latencies) merge(o *latencies) {
	l.samples = append(l.samples, o.samples...)
	l.sorted = false
}

// percentile is the nearest-rank percentile: the smallest sample with at
// least p% of the samples at or below it. p=100 is the maximum.
func (l *latencies) percentile(p float64) time.Duration {
	if len(l.samples) == 0 {
		return 0
	}
	if !l.sorted {
		slices.Sort(l.samples)
		l.sorted = true
	}
	rank := int(math.Ceil(p / 100 * float64(len(l.samples))))
	rank = max(1, min(rank, len(l.samples)))
	return l.samples[rank-1]
}

// histogram counts the samples in buckets whose upper bounds double from
// 250 µs; the last bucket takes everything above the largest bound.
func (l *latencies) histogram() (bounds []time.Duration, counts []int) {
	for b := 250 * time.Microsecond; b <= 8*time.Second; b *= 2 {
		bounds = append(bounds, b)
	}
	counts = make([]int, len(bounds)+1)
	for _, d := range l.samples {
		i, _ := slices.BinarySearch(bounds, d)
		counts[i]++
	}
	return bounds, counts
}

// latencySummary is one series in the report, in milliseconds.
type latencySummary struct {
	Count int     `json:"count"`
	P50   float64 `json:"p50_ms"`
	P90   float64 `json:"p90_ms"`
	P99   float64 `json:"p99_ms"`
	Max   float64 `json:"max_ms"`
}

func ms(d time.Duration) float64 { return math.Round(float64(d.Microseconds())) / 1000 }

func (l *latencies) summary() latencySummary {
	return latencySummary{Count: len(l.samples), P50: ms(l.percentile(50)), P90: ms(l.percentile(90)),
		P99: ms(l.percentile(99)), Max: ms(l.percentile(100))}
}

// loadReport is the printed result. The top-level percentiles are those of
// "vote + claim next", the round trip a labeller waits on between items.
type loadReport struct {
	Labellers       int            `json:"labellers"`
	DurationSeconds float64        `json:"duration_seconds"`
	Votes           int            `json:"votes"`
	VotesPerSecond  float64        `json:"votes_per_second"`
	P50             float64        `json:"p50_ms"`
	P90             float64        `json:"p90_ms"`
	P99             float64        `json:"p99_ms"`
	Max             float64        `json:"max_ms"`
	Claim           latencySummary `json:"claim"`
	Vote            latencySummary `json:"vote"`
	VoteAndClaim    latencySummary `json:"vote_and_claim"`
	Retries         int            `json:"retries"`
	Duplicates      int            `json:"duplicates"`
	NoWork          int            `json:"no_work"`
	Errors          int            `json:"errors"`
	ErrorsByKind    map[string]int `json:"errors_by_kind"`
	cycle           *latencies
}

func (r *loadResult) report() loadReport {
	secs := r.elapsed.Seconds()
	rep := loadReport{
		Labellers:       r.labellers,
		DurationSeconds: math.Round(secs*1000) / 1000,
		Votes:           len(r.acked),
		Claim:           r.claim.summary(),
		Vote:            r.vote.summary(),
		VoteAndClaim:    r.cycle.summary(),
		Retries:         r.retries,
		Duplicates:      r.duplicates,
		NoWork:          r.noWork,
		ErrorsByKind:    map[string]int{},
		cycle:           &r.cycle,
	}
	if secs > 0 {
		rep.VotesPerSecond = math.Round(float64(len(r.acked))/secs*10) / 10
	}
	rep.P50, rep.P90, rep.P99, rep.Max = rep.VoteAndClaim.P50, rep.VoteAndClaim.P90, rep.VoteAndClaim.P99, rep.VoteAndClaim.Max
	for k, v := range r.errors {
		rep.ErrorsByKind[k] = v
		rep.Errors += v
	}
	return rep
}

func (rep loadReport) write(w io.Writer) error {
	fmt.Fprintf(w, "%d labellers for %.1f s: %d votes acknowledged, %.1f votes/s\n\n",
		rep.Labellers, rep.DurationSeconds, rep.Votes, rep.VotesPerSecond)
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "call\tcount\tp50 ms\tp90 ms\tp99 ms\tmax ms\t")
	for _, row := range []struct {
		name string
		s    latencySummary
	}{{"claim next", rep.Claim}, {"vote", rep.Vote}, {"vote + claim next", rep.VoteAndClaim}} {
		fmt.Fprintf(tw, "%s\t%d\t%.2f\t%.2f\t%.2f\t%.2f\t\n", row.name, row.s.Count, row.s.P50, row.s.P90, row.s.P99, row.s.Max)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	if rep.cycle != nil && len(rep.cycle.samples) > 0 {
		fmt.Fprintln(w, "\nvote + claim next, histogram:")
		bounds, counts := rep.cycle.histogram()
		total := len(rep.cycle.samples)
		for i, c := range counts {
			if c == 0 {
				continue
			}
			label := "above " + bounds[len(bounds)-1].String()
			if i < len(bounds) {
				label = "<= " + bounds[i].String()
			}
			fmt.Fprintf(w, "  %12s %7d %s\n", label, c, strings.Repeat("#", int(math.Ceil(40*float64(c)/float64(total)))))
		}
	}
	fmt.Fprintf(w, "\nretried votes: %d (server saw %d as stored already); claims with nothing left: %d\n",
		rep.Retries, rep.Duplicates, rep.NoWork)
	fmt.Fprintf(w, "errors: %d\n", rep.Errors)
	kinds := make([]string, 0, len(rep.ErrorsByKind))
	for k := range rep.ErrorsByKind {
		kinds = append(kinds, k)
	}
	slices.Sort(kinds)
	for _, k := range kinds {
		fmt.Fprintf(w, "  %-28s %d\n", k, rep.ErrorsByKind[k])
	}
	return nil
}

// ---- the driver ----

// loginsAtOnce bounds concurrent logins, and loginTimeout is their time
// limit: each costs the server an argon2id hash, and a hundred at once
// would only queue on its cores.
const (
	loginsAtOnce = 4
	loginTimeout = time.Minute
)

// runLoad logs every account in, then has each work for cfg.duration:
// claim, vote, claim the next, until the time is up or ctx ends.
func runLoad(ctx context.Context, cfg loadConfig, accounts []loadAccount) (*loadResult, error) {
	if cfg.timeout <= 0 {
		cfg.timeout = 10 * time.Second
	}
	transport := &http.Transport{MaxIdleConnsPerHost: len(accounts) + 1, MaxConnsPerHost: 0, IdleConnTimeout: 30 * time.Second}
	defer transport.CloseIdleConnections()
	clients := make([]*labellerClient, len(accounts))
	for i, a := range accounts {
		clients[i] = newLabellerClient(cfg, a, i, transport)
	}
	// Log in before the clock starts: argon2id makes logins slow on purpose
	// (and 64 MiB each), and they are not what the run measures.
	var wg sync.WaitGroup
	loginErrs := make([]error, len(clients))
	slots := make(chan struct{}, loginsAtOnce)
	for i, c := range clients {
		wg.Go(func() {
			slots <- struct{}{}
			defer func() { <-slots }()
			loginErrs[i] = c.login(ctx)
		})
	}
	wg.Wait()
	if err := errors.Join(loginErrs...); err != nil {
		return nil, err
	}
	results := make([]loadResult, len(clients))
	start := time.Now()
	deadline := start.Add(cfg.duration)
	if cfg.started != nil {
		close(cfg.started)
	}
	for i, c := range clients {
		wg.Go(func() { c.work(ctx, deadline, &results[i]) })
	}
	wg.Wait()
	total := &loadResult{labellers: len(clients), elapsed: time.Since(start), errors: map[string]int{}}
	for i := range results {
		total.merge(&results[i])
	}
	return total, nil
}

// Labelling paths for a project; see web/routes.go.
const (
	pathLabelPage = "/p/%s/label"
	pathClaim     = "/api/p/%s/next"
	pathVote      = "/api/p/%s/votes"
)

// labellerClient is one simulated labeller: its own cookie jar, its own
// random source, its own results (merged when the run ends, so the hot
// path takes no lock).
type labellerClient struct {
	base, project string
	account       loadAccount
	http          *http.Client
	rng           *mrand.Rand
	labels        []string // keys of the leaf labels, the choices shown for every item
}

// newLabellerClient makes the n-th labeller; all share one transport (the
// connection pool) but each has its own cookie jar.
func newLabellerClient(cfg loadConfig, a loadAccount, n int, transport http.RoundTripper) *labellerClient {
	jar, _ := cookiejar.New(nil)
	return &labellerClient{
		base:    strings.TrimRight(cfg.baseURL, "/"),
		project: cfg.project,
		account: a,
		http:    &http.Client{Jar: jar, Transport: transport, Timeout: cfg.timeout},
		rng:     mrand.New(mrand.NewPCG(uint64(n)+1, uint64(time.Now().UnixNano()))),
	}
}

// apiItem and apiAnswer are the parts of the labelling API's answers the
// driver reads.
type apiItem struct {
	ID int64 `json:"id"`
}

type apiAnswer struct {
	Next   *apiItem `json:"next"`
	Repeat bool     `json:"repeat"`
}

// callError is a failed call, with the kind it is counted under.
type callError struct {
	kind string
	err  error
}

func (e *callError) Error() string { return e.kind + ": " + e.err.Error() }

func (c *labellerClient) projectURL(path string) string {
	return c.base + fmt.Sprintf(path, url.PathEscape(c.project))
}

// login posts the login form asking for JSON, then reads the label choices
// from the labelling screen's data block.
func (c *labellerClient) login(ctx context.Context) error {
	form := url.Values{"login": {c.account.login}, "password": {c.account.password}}
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, c.base+"/login", strings.NewReader(form.Encode()))
	if err != nil {
		return fmt.Errorf("log in %s: %w", c.account.login, err)
	}
	req.Header.Set("Content-Type", "application/x-www-form-urlencoded")
	req.Header.Set("Accept", "application/json")
	req.Header.Set("Sec-Fetch-Site", "same-origin")
	slow := *c.http
	slow.Timeout = loginTimeout
	resp, err := slow.Do(req)
	if err != nil {
		return fmt.Errorf("log in %s: %w", c.account.login, err)
	}
	io.Copy(io.Discard, resp.Body)
	resp.Body.Close()
	if resp.StatusCode != http.StatusOK {
		return fmt.Errorf("log in %s at %s: HTTP %d", c.account.login, c.base, resp.StatusCode)
	}
	c.labels, err = c.readLabels(ctx)
	return err
}

// readLabels takes the leaf label keys from the JSON block the labelling
// screen carries for its script.
func (c *labellerClient) readLabels(ctx context.Context) ([]string, error) {
	page := c.projectURL(pathLabelPage)
	req, err := http.NewRequestWithContext(ctx, http.MethodGet, page, nil)
	if err != nil {
		return nil, err
	}
	resp, err := c.http.Do(req)
	if err != nil {
		return nil, fmt.Errorf("labelling screen %s: %w", page, err)
	}
	defer resp.Body.Close()
	body, err := io.ReadAll(resp.Body)
	if err != nil {
		return nil, fmt.Errorf("labelling screen %s: %w", page, err)
	}
	if resp.StatusCode != http.StatusOK {
		return nil, fmt.Errorf("labelling screen %s for %s: HTTP %d", page, c.account.login, resp.StatusCode)
	}
	const open = `<script id="label-data" type="application/json">`
	_, rest, ok := strings.Cut(string(body), open)
	block, _, ok2 := strings.Cut(rest, "</script>")
	if !ok || !ok2 {
		return nil, fmt.Errorf("labelling screen %s: no label-data block", page)
	}
	var data struct {
		Labels []struct {
			Key  string `json:"key"`
			Leaf bool   `json:"leaf"`
		} `json:"labels"`
	}
	if err := json.Unmarshal([]byte(block), &data); err != nil {
		return nil, fmt.Errorf("labelling screen %s: label-data: %w", page, err)
	}
	var keys []string
	for _, l := range data.Labels {
		if l.Leaf {
			keys = append(keys, l.Key)
		}
	}
	if len(keys) == 0 {
		return nil, fmt.Errorf("project %s has no labels to vote for", c.project)
	}
	return keys, nil
}

// post sends a JSON body and decodes a JSON answer. Network failures and
// timeouts are kind "<call> network"; HTTP errors "<call> <status>".
func (c *labellerClient) post(ctx context.Context, call, path string, body any) (apiAnswer, error) {
	var ans apiAnswer
	b, err := json.Marshal(body)
	if err != nil {
		return ans, &callError{call + " encode", err}
	}
	req, err := http.NewRequestWithContext(ctx, http.MethodPost, c.projectURL(path), strings.NewReader(string(b)))
	if err != nil {
		return ans, &callError{call + " request", err}
	}
	req.Header.Set("Content-Type", "application/json")
	req.Header.Set("Accept", "application/json")
	req.Header.Set("Sec-Fetch-Site", "same-origin")
	resp, err := c.http.Do(req)
	if err != nil {
		return ans, &callError{call + " network", err}
	}
	defer resp.Body.Close()
	data, err := io.ReadAll(resp.Body)
	if err != nil {
		return ans, &callError{call + " network", err}
	}
	if resp.StatusCode/100 != 2 {
		return ans, &callError{fmt.Sprintf("%s %d", call, resp.StatusCode), fmt.Errorf("%s", strings.TrimSpace(string(data)))}
	}
	if err := json.Unmarshal(data, &ans); err != nil {
		return ans, &callError{call + " bad answer", err}
	}
	return ans, nil
}

func (c *labellerClient) claim(ctx context.Context) (*apiItem, error) {
	ans, err := c.post(ctx, "claim", pathClaim, map[string]any{"exclude": []int64{}})
	return ans.Next, err
}

// voteBody is what the labelling screen sends for one vote.
type voteBody struct {
	ID      string  `json:"id"`
	Item    int64   `json:"item"`
	Label   *string `json:"label"`
	Seconds float64 `json:"seconds"`
	Exclude []int64 `json:"exclude"`
}

// vote sends one vote and, on a network error (the answer may have been
// lost after the server stored it), sends it once more with the same id.
func (c *labellerClient) vote(ctx context.Context, v voteBody, res *loadResult) (apiAnswer, error) {
	ans, err := c.post(ctx, "vote", pathVote, v)
	var ce *callError
	if errors.As(err, &ce) && strings.HasSuffix(ce.kind, " network") && ctx.Err() == nil {
		res.retries++
		ans, err = c.post(ctx, "vote", pathVote, v)
		if err == nil && ans.Repeat {
			res.duplicates++
		}
	}
	return ans, err
}

// newVote draws a label (one vote in twenty is "can't tell") and a time
// spent that looks like a person's.
func (c *labellerClient) newVote(item int64) voteBody {
	v := voteBody{ID: newUUID(), Item: item, Seconds: math.Round((1+c.rng.Float64()*9)*100) / 100, Exclude: []int64{}}
	if c.rng.IntN(20) != 0 {
		v.Label = &c.labels[c.rng.IntN(len(c.labels))]
	}
	return v
}

// noWorkPause is how long a labeller with nothing to claim waits before
// asking again, and a failed call before the next try.
const noWorkPause = 50 * time.Millisecond

// work labels until the deadline: hold an item, vote on it, take the next
// one from the vote's answer (or claim when it had none). A call under way
// at the deadline is finished, not cancelled, so every vote the server
// stored is one the driver counted; only ctx (an interrupt) cuts calls off.
func (c *labellerClient) work(outer context.Context, deadline time.Time, res *loadResult) {
	ctx, cancel := context.WithDeadline(outer, deadline.Add(c.http.Timeout))
	defer cancel()
	var held *apiItem
	var pendingVote time.Time // when the vote that left us without an item was sent
	for ctx.Err() == nil && time.Now().Before(deadline) {
		if held == nil {
			t0 := time.Now()
			it, err := c.claim(ctx)
			if outer.Err() != nil {
				return
			}
			if err != nil {
				res.fail(err.(*callError).kind)
				pause(ctx, noWorkPause, deadline)
				continue
			}
			res.claim.add(time.Since(t0))
			if it == nil {
				res.noWork++
				pendingVote = time.Time{}
				pause(ctx, noWorkPause, deadline)
				continue
			}
			if !pendingVote.IsZero() {
				res.cycle.add(time.Since(pendingVote))
				pendingVote = time.Time{}
			}
			held = it
		}
		v := c.newVote(held.ID)
		t0 := time.Now()
		ans, err := c.vote(ctx, v, res)
		if err != nil {
			if outer.Err() != nil {
				return
			}
			res.fail(err.(*callError).kind)
			// The claim may be gone (expired, or the server lost it): claim afresh.
			held = nil
			pause(ctx, noWorkPause, deadline)
			continue
		}
		d := time.Since(t0)
		res.vote.add(d)
		res.acked = append(res.acked, ackedVote{ID: v.ID, ItemID: v.Item, Login: c.account.login})
		held = ans.Next
		if held != nil {
			res.cycle.add(d)
		} else {
			pendingVote = t0
		}
	}
}

// pause waits d, but not past the deadline.
func pause(ctx context.Context, d time.Duration, deadline time.Time) {
	t := time.NewTimer(min(d, time.Until(deadline)))
	defer t.Stop()
	select {
	case <-ctx.Done():
	case <-t.C:
	}
}
