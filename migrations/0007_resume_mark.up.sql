-- A lead's decision on a labeller stands against the evidence it was made
-- on: the gold figures at the lead's last status change are kept, and the
-- engine pauses a labeller the lead set active again only on the gold
-- answers given since.
ALTER TABLE project_members
    ADD COLUMN gold_correct_mark integer NOT NULL DEFAULT 0 CHECK (gold_correct_mark >= 0),
    ADD COLUMN gold_total_mark integer NOT NULL DEFAULT 0 CHECK (gold_total_mark >= gold_correct_mark);
COMMENT ON COLUMN project_members.gold_total_mark IS
    'Gold items the labeller had answered (per the last fit) when a lead last set their status; only answers after it count toward pausing them automatically.';
