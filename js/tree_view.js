// tree view module (in progress)
