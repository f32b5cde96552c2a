-- A labeller's votes in one project, in time order, with their seconds:
-- the tally returned with every vote and claim, the undo's "latest vote",
-- and the per-labeller lead pages read this index alone. The index it
-- replaces lacked project_id, so the planner often preferred
-- votes_project_time_idx and read every vote of the project since the
-- tally's start to keep one labeller's: a cost that grew with the day's
-- votes on every vote.
CREATE INDEX votes_labeller_project_idx ON votes (labeller_id, project_id, created_at) INCLUDE (seconds);
DROP INDEX votes_labeller_idx;
