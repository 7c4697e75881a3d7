"""Records: the append-only store (events, hash chains, backends, bundles), roles and record
states, and the library of filed processes."""
