ALTER TABLE project_members DROP COLUMN gold_correct_mark, DROP COLUMN gold_total_mark;
