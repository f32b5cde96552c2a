CREATE INDEX votes_labeller_idx ON votes (labeller_id, created_at);
DROP INDEX votes_labeller_project_idx;
