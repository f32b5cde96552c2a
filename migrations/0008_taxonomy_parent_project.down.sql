ALTER TABLE taxonomy_nodes DROP CONSTRAINT taxonomy_nodes_parent_same_project;
ALTER TABLE taxonomy_nodes ADD CONSTRAINT taxonomy_nodes_parent_id_fkey
    FOREIGN KEY (parent_id) REFERENCES taxonomy_nodes (id);
