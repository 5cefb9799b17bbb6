"""Sources: turn user paths into FileRefs (discover) and FileRefs into batches (readers)."""
