DROP TABLE IF EXISTS project_stats, labeller_stats, release_items, releases, consensus, gold_answers,
    votes, claims, items, invites, project_members, taxonomy_nodes, projects, login_failures, sessions, users CASCADE;
DROP FUNCTION IF EXISTS forbid_change();
