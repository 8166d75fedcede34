"""The dated archive: records, manifests, logs, verification and the index."""
