"""Process-level pieces used by both the HTTP process and the workers: settings, logging, allocator."""
