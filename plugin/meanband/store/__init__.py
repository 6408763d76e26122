"""Files that outlive a run: the history store, the environment, the plan file, the JSON report."""
