DROP TABLE project_vote_hours;
ALTER TABLE project_stats DROP COLUMN counted_until;
ALTER TABLE labeller_stats
    DROP COLUMN last_vote_at,
    DROP COLUMN seconds_total,
    DROP COLUMN cant_tell,
    DROP COLUMN votes_all;
