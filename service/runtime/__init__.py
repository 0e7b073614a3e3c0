"""What makes the core a service: jobs, the worker pool, the cache and telemetry."""
