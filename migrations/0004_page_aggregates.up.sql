-- The progress and cost pages used to count a project's votes on every
-- request (a million rows at 100,000 items). The engine's refit already
-- reads every vote, so it now also keeps the counts those pages need, over
-- the votes created before project_stats.counted_until. A page adds the few
-- votes created since then with a range scan of votes_project_time_idx, so
-- its figures stay as fresh as a full count without reading every vote.

ALTER TABLE labeller_stats
    ADD COLUMN votes_all     integer NOT NULL DEFAULT 0 CHECK (votes_all >= 0),
    ADD COLUMN cant_tell     integer NOT NULL DEFAULT 0 CHECK (cant_tell >= 0 AND cant_tell <= votes_all),
    ADD COLUMN seconds_total double precision NOT NULL DEFAULT 0 CHECK (seconds_total >= 0),
    ADD COLUMN last_vote_at  timestamptz;
COMMENT ON COLUMN labeller_stats.votes_all IS 'Every vote of the labeller in the project created before project_stats.counted_until, "can''t tell" included (all are paid).';
COMMENT ON COLUMN labeller_stats.cant_tell IS 'Of votes_all, the "can''t tell" votes (no label).';
COMMENT ON COLUMN labeller_stats.seconds_total IS 'Recorded seconds of the votes counted in votes_all, for pay by the hour and effective hourly pay.';
COMMENT ON COLUMN labeller_stats.last_vote_at IS 'Time of the labeller''s latest vote counted in votes_all, for "labellers active" on the progress page.';

ALTER TABLE project_stats ADD COLUMN counted_until timestamptz;
COMMENT ON COLUMN project_stats.counted_until IS 'The vote counts kept for the lead pages (labeller_stats.votes_all and friends, project_vote_hours) cover the votes created before this time; NULL before the first count.';

CREATE TABLE project_vote_hours (
    project_id bigint NOT NULL REFERENCES projects (id) ON DELETE CASCADE,
    hour       timestamptz NOT NULL CHECK (date_trunc('hour', hour AT TIME ZONE 'UTC') = hour AT TIME ZONE 'UTC'),
    votes      integer NOT NULL CHECK (votes > 0),
    PRIMARY KEY (project_id, hour)
);
COMMENT ON TABLE project_vote_hours IS 'Votes per UTC hour over the 7 days before project_stats.counted_until, "can''t tell" included, kept by the engine''s refit for the progress page. Hours without votes have no row.';
