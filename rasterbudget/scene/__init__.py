"""One scene end to end: scene scalars, the per-block state, the two passes, the manifest."""
