"""Study kinds: pure specs that split into chunks and compute one chunk at a time."""
