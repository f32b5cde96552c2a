-- Concord's core schema: people, projects, taxonomy, items, claims, votes,
-- gold answers, consensus and releases. The rules live in constraints so that
-- no code path (web, CLI, a second server) can store a vote the model forbids.

CREATE TABLE users (
    id            bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    login         text NOT NULL CHECK (login ~ '^[a-z0-9][a-z0-9._@+-]{1,63}$'),
    display_name  text NOT NULL CHECK (length(display_name) BETWEEN 1 AND 100),
    role          text NOT NULL CHECK (role IN ('lead', 'labeller')),
    password_hash text NOT NULL DEFAULT '',
    status        text NOT NULL DEFAULT 'active' CHECK (status IN ('active', 'blocked')),
    created_at    timestamptz NOT NULL DEFAULT now()
);
CREATE UNIQUE INDEX users_login_key ON users (login);
COMMENT ON COLUMN users.password_hash IS 'argon2id/bcrypt hash; empty until the user sets a password through an invite';

CREATE TABLE sessions (
    id_hash    bytea PRIMARY KEY CHECK (length(id_hash) = 32),
    user_id    bigint NOT NULL REFERENCES users (id) ON DELETE CASCADE,
    created_at timestamptz NOT NULL DEFAULT now(),
    expires_at timestamptz NOT NULL,
    CHECK (expires_at > created_at)
);
CREATE INDEX sessions_user_idx ON sessions (user_id);
COMMENT ON TABLE sessions IS 'Server-side sessions; the cookie holds a random token whose SHA-256 is id_hash.';

CREATE TABLE login_failures (
    id         bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    login      text NOT NULL,
    address    text NOT NULL,
    at         timestamptz NOT NULL DEFAULT now()
);
CREATE INDEX login_failures_login_idx ON login_failures (login, at);
CREATE INDEX login_failures_address_idx ON login_failures (address, at);
COMMENT ON TABLE login_failures IS 'Failed logins, counted per account and per address to rate-limit guessing across every server process.';

CREATE TABLE projects (
    id                bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    slug              text NOT NULL UNIQUE CHECK (slug ~ '^[a-z0-9][a-z0-9-]{0,62}$'),
    name              text NOT NULL CHECK (length(name) BETWEEN 1 AND 200),
    description       text NOT NULL DEFAULT '',
    -- vote policy
    min_votes         integer NOT NULL DEFAULT 3 CHECK (min_votes BETWEEN 1 AND 50),
    max_votes         integer NOT NULL DEFAULT 7 CHECK (max_votes BETWEEN 1 AND 50),
    confidence_target double precision NOT NULL DEFAULT 0.95 CHECK (confidence_target > 0 AND confidence_target < 1),
    gold_rate         double precision NOT NULL DEFAULT 0.05 CHECK (gold_rate >= 0 AND gold_rate <= 0.5),
    claim_seconds     integer NOT NULL DEFAULT 300 CHECK (claim_seconds BETWEEN 10 AND 86400),
    accuracy_floor    double precision NOT NULL DEFAULT 0.6 CHECK (accuracy_floor >= 0 AND accuracy_floor <= 1),
    gold_feedback     boolean NOT NULL DEFAULT false,
    -- pay model
    pay_model         text NOT NULL DEFAULT 'per_vote' CHECK (pay_model IN ('per_vote', 'per_hour')),
    pay_rate          numeric(14, 6) NOT NULL DEFAULT 0 CHECK (pay_rate >= 0),
    currency          text NOT NULL DEFAULT 'EUR' CHECK (currency ~ '^[A-Z]{3}$'),
    budget_cap        numeric(14, 2) CHECK (budget_cap IS NULL OR budget_cap >= 0),
    min_hourly_pay    numeric(14, 2) CHECK (min_hourly_pay IS NULL OR min_hourly_pay >= 0),
    release_seed      bigint NOT NULL DEFAULT 1,
    created_at        timestamptz NOT NULL DEFAULT now(),
    CHECK (max_votes >= min_votes)
);
COMMENT ON COLUMN projects.confidence_target IS 'An item is done when its consensus confidence reaches this and it has at least min_votes votes.';
COMMENT ON COLUMN projects.accuracy_floor IS 'A labeller whose gold-accuracy interval lies wholly below this is paused automatically.';

CREATE TABLE taxonomy_nodes (
    id          bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    project_id  bigint NOT NULL REFERENCES projects (id) ON DELETE CASCADE,
    parent_id   bigint REFERENCES taxonomy_nodes (id),
    key         text NOT NULL CHECK (key ~ '^[a-z0-9][a-z0-9._-]{0,63}$'),
    name        text NOT NULL CHECK (length(name) BETWEEN 1 AND 200),
    description text NOT NULL DEFAULT '',
    position    integer NOT NULL CHECK (position >= 0),
    depth       integer NOT NULL CHECK (depth >= 0),
    is_leaf     boolean NOT NULL DEFAULT true,
    UNIQUE (project_id, key),
    UNIQUE (project_id, id)
);
CREATE INDEX taxonomy_nodes_parent_idx ON taxonomy_nodes (parent_id);

CREATE TABLE project_members (
    project_id bigint NOT NULL REFERENCES projects (id) ON DELETE CASCADE,
    user_id    bigint NOT NULL REFERENCES users (id) ON DELETE CASCADE,
    status     text NOT NULL DEFAULT 'active' CHECK (status IN ('active', 'paused', 'blocked')),
    status_reason text NOT NULL DEFAULT '',
    joined_at  timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (project_id, user_id)
);
CREATE INDEX project_members_user_idx ON project_members (user_id);

CREATE TABLE invites (
    token_hash bytea PRIMARY KEY CHECK (length(token_hash) = 32),
    project_id bigint NOT NULL REFERENCES projects (id) ON DELETE CASCADE,
    created_by bigint NOT NULL REFERENCES users (id),
    created_at timestamptz NOT NULL DEFAULT now(),
    expires_at timestamptz NOT NULL,
    used_by    bigint REFERENCES users (id),
    used_at    timestamptz,
    CHECK ((used_by IS NULL) = (used_at IS NULL))
);

CREATE TABLE items (
    id            bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    project_id    bigint NOT NULL REFERENCES projects (id) ON DELETE CASCADE,
    sha256        bytea NOT NULL CHECK (length(sha256) = 32),
    file_key      text NOT NULL CHECK (file_key <> ''),
    original_name text NOT NULL DEFAULT '',
    media_type    text NOT NULL CHECK (media_type IN ('image/jpeg', 'image/png', 'image/gif', 'image/webp')),
    bytes         bigint NOT NULL CHECK (bytes > 0),
    width         integer NOT NULL CHECK (width > 0),
    height        integer NOT NULL CHECK (height > 0),
    phash         bigint,
    group_key     text,
    cluster_id    bigint,
    prior_label   text,
    status        text NOT NULL DEFAULT 'unstarted' CHECK (status IN ('unstarted', 'needs_votes', 'done', 'review')),
    vote_count    integer NOT NULL DEFAULT 0 CHECK (vote_count >= 0),
    votes_needed  integer NOT NULL DEFAULT 1 CHECK (votes_needed >= 0),
    priority      double precision NOT NULL DEFAULT 0,
    created_at    timestamptz NOT NULL DEFAULT now(),
    UNIQUE (project_id, sha256),
    UNIQUE (project_id, id)
);
-- Claiming the next item reads the open items of a project in priority order.
CREATE INDEX items_open_idx ON items (project_id, priority DESC, id)
    WHERE status IN ('unstarted', 'needs_votes');
CREATE INDEX items_project_status_idx ON items (project_id, status);
CREATE INDEX items_cluster_idx ON items (project_id, cluster_id);
COMMENT ON COLUMN items.vote_count IS 'Votes with a label (not "can''t tell"); kept by the vote insert so claims need no count.';
COMMENT ON COLUMN items.votes_needed IS 'At least this many more votes before the item can be done; claims never exceed it.';
COMMENT ON COLUMN items.priority IS 'Expected gain in correctness from one more vote, set by the agreement engine; higher first.';
COMMENT ON COLUMN items.cluster_id IS 'Near-duplicate cluster (the id of its first item); releases keep a cluster in one split.';

CREATE TABLE claims (
    item_id     bigint NOT NULL REFERENCES items (id) ON DELETE CASCADE,
    labeller_id bigint NOT NULL REFERENCES users (id) ON DELETE CASCADE,
    project_id  bigint NOT NULL REFERENCES projects (id) ON DELETE CASCADE,
    claimed_at  timestamptz NOT NULL DEFAULT now(),
    expires_at  timestamptz NOT NULL,
    PRIMARY KEY (item_id, labeller_id),
    CHECK (expires_at > claimed_at)
);
CREATE INDEX claims_labeller_idx ON claims (labeller_id, expires_at);
COMMENT ON TABLE claims IS 'An item shown to a labeller; it counts against the votes the item still needs until it expires.';

CREATE TABLE votes (
    id          uuid PRIMARY KEY,
    project_id  bigint NOT NULL REFERENCES projects (id) ON DELETE CASCADE,
    item_id     bigint NOT NULL,
    labeller_id bigint NOT NULL REFERENCES users (id),
    label_id    bigint,
    seconds     real NOT NULL DEFAULT 0 CHECK (seconds >= 0 AND seconds <= 86400),
    created_at  timestamptz NOT NULL DEFAULT now(),
    UNIQUE (item_id, labeller_id),
    FOREIGN KEY (project_id, item_id) REFERENCES items (project_id, id) ON DELETE CASCADE,
    FOREIGN KEY (project_id, label_id) REFERENCES taxonomy_nodes (project_id, id)
);
CREATE INDEX votes_labeller_idx ON votes (labeller_id, created_at);
CREATE INDEX votes_project_time_idx ON votes (project_id, created_at);
COMMENT ON COLUMN votes.id IS 'Made by the client, so a resubmitted vote is stored once.';
COMMENT ON COLUMN votes.label_id IS 'NULL means the labeller could not tell; such votes are paid but carry no label.';

CREATE TABLE gold_answers (
    item_id    bigint PRIMARY KEY,
    project_id bigint NOT NULL,
    label_id   bigint NOT NULL,
    source     text NOT NULL CHECK (source IN ('gold', 'lead')),
    decided_by bigint REFERENCES users (id),
    created_at timestamptz NOT NULL DEFAULT now(),
    FOREIGN KEY (project_id, item_id) REFERENCES items (project_id, id) ON DELETE CASCADE,
    FOREIGN KEY (project_id, label_id) REFERENCES taxonomy_nodes (project_id, id)
);
CREATE INDEX gold_answers_project_idx ON gold_answers (project_id);
COMMENT ON TABLE gold_answers IS 'Known answers: imported gold items and lead decisions. Held fixed by the engine; never shown to labellers.';

CREATE TABLE consensus (
    item_id           bigint PRIMARY KEY,
    project_id        bigint NOT NULL,
    label_id          bigint,
    confidence        double precision NOT NULL CHECK (confidence >= 0 AND confidence <= 1),
    method            text NOT NULL CHECK (method IN ('mv', 'ds', 'lead', 'gold')),
    vote_count        integer NOT NULL CHECK (vote_count >= 0),
    tied              boolean NOT NULL DEFAULT false,
    rollup_label_id   bigint,
    rollup_confidence double precision,
    posterior_labels  bigint[] NOT NULL DEFAULT '{}',
    posterior         double precision[] NOT NULL DEFAULT '{}',
    updated_at        timestamptz NOT NULL DEFAULT now(),
    FOREIGN KEY (project_id, item_id) REFERENCES items (project_id, id) ON DELETE CASCADE,
    FOREIGN KEY (project_id, label_id) REFERENCES taxonomy_nodes (project_id, id),
    FOREIGN KEY (project_id, rollup_label_id) REFERENCES taxonomy_nodes (project_id, id),
    CHECK (cardinality(posterior_labels) = cardinality(posterior))
);
CREATE INDEX consensus_project_label_idx ON consensus (project_id, label_id, confidence);

CREATE TABLE releases (
    id             bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
    project_id     bigint NOT NULL REFERENCES projects (id) ON DELETE CASCADE,
    name           text NOT NULL CHECK (name ~ '^[A-Za-z0-9][A-Za-z0-9._-]{0,99}$'),
    seed           bigint NOT NULL,
    split_train    integer NOT NULL CHECK (split_train BETWEEN 0 AND 100),
    split_val      integer NOT NULL CHECK (split_val BETWEEN 0 AND 100),
    split_test     integer NOT NULL CHECK (split_test BETWEEN 0 AND 100),
    min_confidence double precision NOT NULL CHECK (min_confidence >= 0 AND min_confidence <= 1),
    level          integer CHECK (level IS NULL OR level >= 0),
    item_count     integer NOT NULL CHECK (item_count >= 0),
    manifest_sha256 bytea NOT NULL CHECK (length(manifest_sha256) = 32),
    card           text NOT NULL DEFAULT '',
    created_by     bigint REFERENCES users (id),
    created_at     timestamptz NOT NULL DEFAULT now(),
    UNIQUE (project_id, name),
    CHECK (split_train + split_val + split_test = 100)
);
COMMENT ON COLUMN releases.level IS 'Taxonomy depth the labels are taken at; NULL means the leaf.';

CREATE TABLE release_items (
    release_id bigint NOT NULL REFERENCES releases (id) ON DELETE CASCADE,
    item_id    bigint NOT NULL REFERENCES items (id),
    split      text NOT NULL CHECK (split IN ('train', 'validation', 'test')),
    label_key  text NOT NULL,
    confidence double precision NOT NULL,
    votes      integer NOT NULL,
    group_key  text NOT NULL,
    PRIMARY KEY (release_id, item_id)
);
CREATE INDEX release_items_item_idx ON release_items (item_id);

-- Releases are immutable once written.
CREATE FUNCTION forbid_change() RETURNS trigger LANGUAGE plpgsql AS $$
BEGIN
    RAISE EXCEPTION '% rows are immutable', TG_TABLE_NAME USING ERRCODE = 'integrity_constraint_violation';
END $$;
CREATE TRIGGER releases_immutable BEFORE UPDATE ON releases FOR EACH ROW EXECUTE FUNCTION forbid_change();
CREATE TRIGGER release_items_immutable BEFORE UPDATE ON release_items FOR EACH ROW EXECUTE FUNCTION forbid_change();

-- Aggregates the engine loop keeps so that lead pages read a row, not a million votes.
CREATE TABLE labeller_stats (
    project_id      bigint NOT NULL REFERENCES projects (id) ON DELETE CASCADE,
    user_id         bigint NOT NULL REFERENCES users (id) ON DELETE CASCADE,
    votes           integer NOT NULL DEFAULT 0,
    median_seconds  double precision,
    accuracy        double precision,
    gold_correct    integer NOT NULL DEFAULT 0,
    gold_total      integer NOT NULL DEFAULT 0,
    gold_low        double precision,
    gold_high       double precision,
    agreement       double precision,
    flags           text[] NOT NULL DEFAULT '{}',
    confusion       jsonb,
    updated_at      timestamptz NOT NULL DEFAULT now(),
    PRIMARY KEY (project_id, user_id)
);

CREATE TABLE project_stats (
    project_id    bigint PRIMARY KEY REFERENCES projects (id) ON DELETE CASCADE,
    votes_at_fit  bigint NOT NULL DEFAULT 0,
    fitted_at     timestamptz NOT NULL DEFAULT now(),
    fit_millis    integer NOT NULL DEFAULT 0,
    summary       jsonb NOT NULL DEFAULT '{}'
);
COMMENT ON COLUMN project_stats.summary IS 'Agreement figures (kappa, alpha, intervals, per-label, per-depth, pairwise) from the last engine fit, for the lead pages.';
