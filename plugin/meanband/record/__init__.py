"""Recording checks: the result row, the recorder behind the ``trials`` fixture, its settings."""
