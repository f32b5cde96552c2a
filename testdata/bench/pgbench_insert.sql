-- One vote-shaped row per transaction, for comparing Concord's votes per
-- second with the same PostgreSQL's plain insert rate (BENCHMARKS.md).
-- Needs: CREATE TABLE bench_votes (id uuid PRIMARY KEY, item_id bigint NOT NULL,
--   labeller_id bigint NOT NULL, label_id bigint, seconds real NOT NULL,
--   created_at timestamptz NOT NULL DEFAULT now());
\set item random(1, 20000)
\set labeller random(1, 100)
\set label random(1, 15)
INSERT INTO bench_votes (id, item_id, labeller_id, label_id, seconds)
VALUES (gen_random_uuid(), :item, :labeller, :label, random() * 10);
