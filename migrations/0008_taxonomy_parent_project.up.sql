-- A label's parent must be a label of the same project: the single-column
-- foreign key let a node hang under another project's tree.
ALTER TABLE taxonomy_nodes DROP CONSTRAINT taxonomy_nodes_parent_id_fkey;
ALTER TABLE taxonomy_nodes ADD CONSTRAINT taxonomy_nodes_parent_same_project
    FOREIGN KEY (project_id, parent_id) REFERENCES taxonomy_nodes (project_id, id);
