"""The scan: policy, discovery, the pipeline, result cache, process pool, git revisions."""
